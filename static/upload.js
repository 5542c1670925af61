// Send a form with files through XMLHttpRequest so a progress bar can show the upload,
// then show the page the server answers with. Without this script (or without
// XMLHttpRequest upload events) the form submits normally.
(function () {
  "use strict";

  function percent(loaded, total) {
    return total > 0 ? Math.min(100, Math.round((100 * loaded) / total)) : 0;
  }

  function hasFile(form) {
    return Array.prototype.some.call(form.querySelectorAll("input[type=file]"), function (el) {
      return el.files && el.files.length > 0;
    });
  }

  // The last upload's progress, kept on the window (which outlives the replaced document)
  // so a page or a test can tell how far it got.
  function record(value) {
    window.foldwiseUpload = { percent: value };
  }

  function show(html) {
    // The answer is a whole page from this origin: replace the document with it.
    document.open();
    document.write(html);
    document.close();
  }

  function init() {
    var forms = document.querySelectorAll("form[data-upload-form]");
    Array.prototype.forEach.call(forms, function (form) {
      var box = form.querySelector("[data-upload-progress]");
      if (!box || typeof window.FormData === "undefined") {
        return;
      }
      var bar = box.querySelector("progress");
      var status = box.querySelector("[data-upload-status]");
      form.addEventListener("submit", function (ev) {
        if (!hasFile(form)) {
          return; // a pasted spectrum is small: an ordinary submit is as fast
        }
        ev.preventDefault();
        var button = form.querySelector("button[type=submit]");
        if (button) {
          button.disabled = true;
        }
        box.hidden = false;
        bar.value = 0;
        status.textContent = "Sending the file… 0 %";
        var xhr = new XMLHttpRequest();
        xhr.open(form.method || "post", form.action);
        xhr.upload.addEventListener("progress", function (e) {
          if (e.lengthComputable) {
            bar.value = percent(e.loaded, e.total);
            record(bar.value);
            status.textContent = "Sending the file… " + bar.value + " %";
          }
        });
        xhr.upload.addEventListener("load", function () {
          bar.value = 100;
          record(100);
          status.textContent = "Sent; computing the result…";
        });
        xhr.addEventListener("load", function () {
          show(xhr.responseText);
        });
        xhr.addEventListener("error", function () {
          status.textContent = "The file could not be sent; check the connection and try again.";
          if (button) {
            button.disabled = false;
          }
        });
        xhr.send(new FormData(form));
      });
    });
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", init);
  } else {
    init();
  }
})();
