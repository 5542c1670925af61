// Add and remove source rows. Without this script the page still offers one blank row
// per source type; with it, rows can be added and removed freely. Field names follow
// "<type>-<index>-<field>" and are renumbered after every change.
(function () {
  "use strict";

  var ROW_NAME = /^([a-z_]+)-(\d+)-/;

  function renumber(container) {
    var rows = container.querySelectorAll("[data-row]");
    Array.prototype.forEach.call(rows, function (row, i) {
      var swap = function (value) {
        return value.replace(ROW_NAME, function (_, kind) {
          return kind + "-" + i + "-";
        });
      };
      Array.prototype.forEach.call(row.querySelectorAll("[name]"), function (el) {
        el.name = swap(el.name);
      });
      Array.prototype.forEach.call(row.querySelectorAll("[id]"), function (el) {
        el.id = swap(el.id);
      });
      Array.prototype.forEach.call(row.querySelectorAll("label[for]"), function (el) {
        el.htmlFor = swap(el.htmlFor);
      });
      Array.prototype.forEach.call(row.querySelectorAll("[aria-describedby]"), function (el) {
        var ids = el.getAttribute("aria-describedby").split(" ").map(swap);
        el.setAttribute("aria-describedby", ids.join(" "));
      });
      var title = row.querySelector("[data-row-title]");
      if (title) {
        title.textContent = title.textContent.replace(/\d+$/, String(i + 1));
      }
      var remove = row.querySelector("[data-remove-row]");
      if (remove) {
        remove.textContent = remove.textContent.replace(/\d+$/, String(i + 1));
        remove.hidden = rows.length < 2;
      }
    });
  }

  function clearRow(row) {
    Array.prototype.forEach.call(row.querySelectorAll("input"), function (el) {
      el.value = "";
      el.removeAttribute("aria-invalid");
    });
    Array.prototype.forEach.call(row.querySelectorAll("select"), function (el) {
      el.selectedIndex = 0;
    });
    Array.prototype.forEach.call(row.querySelectorAll(".field-error"), function (el) {
      el.parentNode.removeChild(el);
    });
    Array.prototype.forEach.call(row.querySelectorAll(".has-error"), function (el) {
      el.classList.remove("has-error");
    });
    var hint = row.querySelector(".hint-inline");
    if (hint) {
      hint.parentNode.removeChild(hint);
    }
  }

  function isBlank(row) {
    return Array.prototype.every.call(row.querySelectorAll("input"), function (el) {
      return el.value.trim() === "";
    });
  }

  function init() {
    var groups = document.querySelectorAll("[data-rows]");
    Array.prototype.forEach.call(groups, function (container) {
      var kind = container.getAttribute("data-rows");
      var add = document.querySelector('[data-add-row="' + kind + '"]');
      container.addEventListener("click", function (ev) {
        var button = ev.target.closest("[data-remove-row]");
        if (!button) {
          return;
        }
        var row = button.closest("[data-row]");
        var next = row.nextElementSibling || row.previousElementSibling;
        row.parentNode.removeChild(row);
        renumber(container);
        var focus = next && next.querySelector("input");
        if (focus) {
          focus.focus();
        } else if (add) {
          add.focus();
        }
      });
      // With the add button working, a trailing blank row is only clutter.
      var rows = container.querySelectorAll("[data-row]");
      var last = rows[rows.length - 1];
      if (add && rows.length > 1 && isBlank(last)) {
        container.removeChild(last);
      }
      if (add) {
        add.hidden = false;
        add.addEventListener("click", function () {
          var rows = container.querySelectorAll("[data-row]");
          var last = rows[rows.length - 1];
          var copy = last.cloneNode(true);
          clearRow(copy);
          container.appendChild(copy);
          renumber(container);
          var first = copy.querySelector("input");
          if (first) {
            first.focus();
          }
        });
      }
      renumber(container);
    });
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", init);
  } else {
    init();
  }
})();
