// The result's take-away actions: print the report, delete a saved result with its token
// (through the JSON API's DELETE, the same call a script would make).
(function () {
  "use strict";
  document.querySelectorAll("[data-print]").forEach(function (button) {
    button.addEventListener("click", function () {
      window.print();
    });
  });
  document.querySelectorAll("form[data-delete-form]").forEach(function (form) {
    var status = document.querySelector("[data-delete-status]");
    form.addEventListener("submit", function (event) {
      event.preventDefault();
      var token = form.querySelector("input[name=token]").value.trim();
      if (!token) {
        status.textContent = "Give the delete token first.";
        return;
      }
      if (!window.confirm("Delete this saved result for everyone who has the link?")) {
        return;
      }
      var id = form.getAttribute("data-record");
      fetch("/api/v1/diagnoses/" + encodeURIComponent(id), {
        method: "DELETE",
        headers: { "X-Delete-Token": token, "Accept": "application/problem+json" }
      }).then(function (response) {
        if (response.status === 204) {
          status.textContent = "Deleted. This link now shows nothing.";
          form.hidden = true;
          return null;
        }
        return response.json().then(function (problem) {
          status.textContent = "Not deleted: " + (problem.detail || response.statusText);
        });
      }).catch(function () {
        status.textContent = "Not deleted: the server did not answer; try again.";
      });
    });
  });
})();
