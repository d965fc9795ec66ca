// saltplan workbench: sortable tables (click or Enter/Space on a header). No network use.
(function () {
  "use strict";
  function cellValue(row, i) {
    var cell = row.cells[i];
    var text = cell ? cell.textContent.trim() : "";
    var num = parseFloat(text.replace(/[^0-9.eE+-]/g, ""));
    return /^[~≈<>]?\s*[-+]?[0-9]/.test(text) && !isNaN(num) ? num : text.toLowerCase();
  }
  function sortBy(table, th, i) {
    var body = table.tBodies[0];
    if (!body) return;
    var asc = th.getAttribute("aria-sort") !== "ascending";
    Array.prototype.forEach.call(th.parentNode.children, function (h) { h.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", asc ? "ascending" : "descending");
    var rows = Array.prototype.slice.call(body.rows);
    rows.sort(function (a, b) {
      var x = cellValue(a, i), y = cellValue(b, i);
      if (typeof x !== typeof y) { x = String(x); y = String(y); }
      return (x < y ? -1 : x > y ? 1 : 0) * (asc ? 1 : -1);
    });
    rows.forEach(function (r) { body.appendChild(r); });
  }
  function init(root) {
    var tables = root.querySelectorAll("table.sortable, table.sp-cands");
    Array.prototype.forEach.call(tables, function (table) {
      if (table.dataset.sortReady || !table.tHead) return;
      table.dataset.sortReady = "1";
      var heads = table.tHead.rows[table.tHead.rows.length - 1].cells;
      Array.prototype.forEach.call(heads, function (th, i) {
        th.setAttribute("data-sort", "");
        th.tabIndex = 0;
        th.title = "sort by this column";
        th.addEventListener("click", function () { sortBy(table, th, i); });
        th.addEventListener("keydown", function (e) {
          if (e.key === "Enter" || e.key === " ") { e.preventDefault(); sortBy(table, th, i); }
        });
      });
    });
  }
  document.addEventListener("DOMContentLoaded", function () { init(document); });
  document.addEventListener("htmx:afterSwap", function (e) { init(e.target); });
})();
