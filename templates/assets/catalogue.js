// The catalogue table: search, filters and sorting, offline, no dependencies.
// Without JavaScript the whole table is shown and the controls stay hidden.
// window.DOSSIER_SEARCH (search-index.js, built with the site) maps words to rows.
(function () {
  "use strict";
  var table = document.getElementById("systems");
  var form = document.getElementById("filters");
  if (!table || !form) { return; }
  var text = document.getElementById("filter-text");
  var status = document.getElementById("filter-status");
  var open = document.getElementById("filter-open");
  var count = document.getElementById("filter-count");
  var body = table.tBodies[0];
  var rows = Array.prototype.slice.call(body.rows);
  var index = window.DOSSIER_SEARCH || { systems: [], words: {} };
  var words = Object.keys(index.words);
  var rowOf = {};
  index.systems.forEach(function (id, i) { rowOf[i] = id; });
  rows.forEach(function (row) { row.dataset.id = row.cells[0].getAttribute("data-value"); });
  form.hidden = false;
  form.addEventListener("submit", function (event) { event.preventDefault(); });

  // Ids of the systems with a word starting with `prefix`.
  function matching(prefix) {
    var found = {};
    words.forEach(function (word) {
      if (word.lastIndexOf(prefix, 0) === 0) {
        index.words[word].forEach(function (i) { found[rowOf[i]] = true; });
      }
    });
    return found;
  }

  function apply() {
    var query = text.value.toLowerCase().split(/[^0-9a-z\u00c0-\u024f-]+/).filter(Boolean);
    var sets = query.map(matching);
    var wanted = status.value;
    var shown = 0;
    rows.forEach(function (row) {
      var id = row.dataset.id;
      var ok = sets.every(function (set) { return set[id]; }) &&
               (!wanted || row.getAttribute("data-status").split(" ").indexOf(wanted) !== -1) &&
               (!open.checked || Number(row.getAttribute("data-open")) > 0);
      row.hidden = !ok;
      if (ok) { shown += 1; }
    });
    count.textContent = shown + " of " + rows.length + " systems";
  }

  // Sorting: a button in each sortable heading; aria-sort tells assistive technology the order.
  var headings = Array.prototype.slice.call(table.tHead.rows[0].cells);
  headings.forEach(function (th, column) {
    var button = th.querySelector("button");
    if (!button) { return; }
    button.addEventListener("click", function () {
      var ascending = th.getAttribute("aria-sort") !== "ascending";
      var numeric = button.getAttribute("data-sort") === "number";
      headings.forEach(function (other) { other.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", ascending ? "ascending" : "descending");
      var keyed = rows.map(function (row, i) {
        var raw = row.cells[column].getAttribute("data-value") || "";
        return { row: row, i: i, empty: raw === "", key: numeric ? Number(raw) : raw.toLowerCase() };
      });
      keyed.sort(function (a, b) {
        if (a.empty !== b.empty) { return a.empty ? 1 : -1; }  // rows without a value last, either way
        var c = a.key < b.key ? -1 : (a.key > b.key ? 1 : 0);
        return (ascending ? c : -c) || a.i - b.i;
      });
      keyed.forEach(function (k) { body.appendChild(k.row); });
      rows = keyed.map(function (k) { return k.row; });
    });
  });

  text.addEventListener("input", apply);
  status.addEventListener("change", apply);
  open.addEventListener("change", apply);
  apply();
}());
