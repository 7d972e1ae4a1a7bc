/* levelfield table sorting: click a column heading of a table.sortable to sort by it, click again
   to reverse. Cells may carry data-value (a number) to sort by instead of their text. No server. */
(function () {
  "use strict";

  function key(cell, numeric) {
    var raw = cell.hasAttribute("data-value") ? cell.getAttribute("data-value") : cell.textContent.trim();
    if (numeric) {
      var n = parseFloat(raw.replace(/\u2212/g, "-").replace(/,/g, ""));
      return isNaN(n) ? -Infinity : n;
    }
    return raw.toLowerCase();
  }

  function sortBy(table, index, button) {
    var th = button.parentNode;
    var numeric = th.getAttribute("data-sort") === "number";
    var ascending = th.getAttribute("aria-sort") !== "ascending";
    var body = table.tBodies[0];
    var rows = Array.prototype.slice.call(body.rows);
    rows.sort(function (r1, r2) {
      var a = key(r1.cells[index], numeric), b = key(r2.cells[index], numeric);
      var c = a < b ? -1 : a > b ? 1 : 0;
      return ascending ? c : -c;
    });
    var heads = table.tHead.rows[0].cells;
    for (var i = 0; i < heads.length; i++) {
      heads[i].removeAttribute("aria-sort");
    }
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
    for (var j = 0; j < rows.length; j++) {
      body.appendChild(rows[j]);
    }
  }

  function prepare(table) {
    if (!table.tHead || !table.tBodies.length) {
      return;
    }
    var heads = table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads, function (th, index) {
      var button = document.createElement("button");
      button.type = "button";
      button.className = "sort";
      while (th.firstChild) {
        button.appendChild(th.firstChild);
      }
      th.appendChild(button);
      button.addEventListener("click", function () {
        sortBy(table, index, button);
      });
    });
    table.classList.add("sort-ready");
  }

  function start() {
    Array.prototype.forEach.call(document.querySelectorAll("table.sortable"), prepare);
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
