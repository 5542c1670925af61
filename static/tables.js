// Sortable tables: each <th data-sort="number|text"> holds a <button>; choosing it sorts
// the rows by that column (again: the other way). Numeric cells carry data-value.
(function () {
  "use strict";

  function cellKey(row, col, kind) {
    var cell = row.cells[col];
    if (!cell) {
      return kind === "number" ? NaN : "";
    }
    if (kind === "number") {
      var raw = cell.getAttribute("data-value");
      return raw === null || raw === "" ? NaN : parseFloat(raw);
    }
    return cell.textContent.trim().toLowerCase();
  }

  function compare(a, b, kind) {
    if (kind === "number") {
      var an = isNaN(a), bn = isNaN(b);
      if (an || bn) {
        return an === bn ? 0 : (an ? 1 : -1); // blanks last
      }
      return a - b;
    }
    return a.localeCompare(b);
  }

  function sortBy(table, th) {
    var headers = table.tHead.rows[0].cells;
    var col = Array.prototype.indexOf.call(headers, th);
    var kind = th.getAttribute("data-sort") || "text";
    var ascending = th.getAttribute("aria-sort") !== "ascending";
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows).map(function (row, i) {
      return { row: row, key: cellKey(row, col, kind), i: i };
    });
    rows.sort(function (x, y) {
      var c = compare(x.key, y.key, kind);
      if (c === 0) {
        return x.i - y.i;
      }
      return ascending ? c : -c;
    });
    rows.forEach(function (r) {
      body.appendChild(r.row);
    });
    Array.prototype.forEach.call(headers, function (h) {
      h.removeAttribute("aria-sort");
    });
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
  }

  function init() {
    var tables = document.querySelectorAll("table[data-sortable]");
    Array.prototype.forEach.call(tables, function (table) {
      var headers = table.querySelectorAll("th[data-sort]");
      Array.prototype.forEach.call(headers, function (th) {
        var button = th.querySelector("button");
        if (button) {
          button.addEventListener("click", function () {
            sortBy(table, th);
          });
        }
      });
    });
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", init);
  } else {
    init();
  }
})();
