/* pilewise: sortable tables. No library, no network; the pages read the same without it.
 *
 * A table with class "sortable" gets a button in each header cell (unless the cell has class
 * "nosort"). Activating the button (click, Enter or Space: it is a real <button>) sorts the
 * table's rows by that column; activating it again reverses the order. A cell's data-sort attribute,
 * when present, holds the raw value to sort by (numbers as numbers); otherwise its text is compared.
 * Ties keep their previous order (Array.prototype.sort is stable since ECMAScript 2019), and
 * aria-sort on the header cell tells assistive technology which column orders the rows.
 */
(function () {
  "use strict";

  function cellKey(row, index) {
    var cell = row.cells[index];
    if (!cell) { return { num: false, text: "" }; }
    var raw = cell.hasAttribute("data-sort") ? cell.getAttribute("data-sort") : cell.textContent;
    var text = (raw || "").trim();
    var number = text === "" ? NaN : Number(text);
    return { num: !isNaN(number), value: number, text: text };
  }

  function compare(a, b) {
    if (a.num && b.num) { return a.value - b.value; }
    if (a.num !== b.num) { return a.num ? -1 : 1; } /* numbers before text, empty cells last */
    if (a.text === "" || b.text === "") { return (a.text === "" ? 1 : 0) - (b.text === "" ? 1 : 0); }
    return a.text.localeCompare(b.text, undefined, { numeric: true, sensitivity: "base" });
  }

  function sortBy(table, th, index) {
    var body = table.tBodies[0];
    if (!body) { return; }
    var ascending = th.getAttribute("aria-sort") !== "ascending";
    var rows = Array.prototype.slice.call(body.rows).map(function (row) {
      return { row: row, key: cellKey(row, index) };
    });
    rows.sort(function (x, y) {
      var order = compare(x.key, y.key);
      return ascending ? order : -order;
    });
    var headers = table.tHead ? table.tHead.rows[0].cells : [];
    Array.prototype.forEach.call(headers, function (other) { other.removeAttribute("aria-sort"); });
    th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
    rows.forEach(function (item) { body.appendChild(item.row); });
  }

  function prepare(table) {
    if (!table.tHead || !table.tHead.rows.length) { return; }
    Array.prototype.forEach.call(table.tHead.rows[0].cells, function (th, index) {
      if (th.classList.contains("nosort") || th.colSpan > 1) { return; }
      var button = document.createElement("button");
      button.type = "button";
      button.className = "sort";
      while (th.firstChild) { button.appendChild(th.firstChild); }
      button.setAttribute("title", "Sort by this column");
      button.addEventListener("click", function () { sortBy(table, th, index); });
      th.appendChild(button);
    });
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
