// pilewise: search within one run, on the index that the run wrote beside its pages (search-index.js).
// Results are built from text nodes only: no document text is ever parsed as markup.
(function () {
  "use strict";
  var form = document.getElementById("finder");
  var data = window.pilewiseSearch;
  if (!form || !data) { return; }
  var up = form.getAttribute("data-up") || "";
  var input = document.getElementById("finder-query");
  var list = document.getElementById("finder-hits");
  var status = document.getElementById("finder-status");
  var LIMIT = 40;
  form.hidden = false;

  function words(text) {
    return text.toLowerCase().split(/[^\p{L}\p{N}]+/u).filter(function (w) { return w.length > 0; });
  }

  function matches(haystack, needles) {
    var lower = haystack.toLowerCase();
    for (var i = 0; i < needles.length; i++) {
      if (lower.indexOf(needles[i]) < 0) { return false; }
    }
    return true;
  }

  function item(kind, label, detail, href) {
    var li = document.createElement("li");
    var a = document.createElement("a");
    a.href = up + href;
    a.textContent = label || "(untitled)";
    var tag = document.createElement("span");
    tag.className = "hit-kind";
    tag.textContent = kind + " ";
    li.appendChild(tag);
    li.appendChild(a);
    if (detail) {
      var small = document.createElement("span");
      small.className = "hit-detail";
      small.textContent = " " + detail;
      li.appendChild(small);
    }
    return li;
  }

  function search() {
    var needles = words(input.value);
    while (list.firstChild) { list.removeChild(list.firstChild); }
    if (needles.length === 0) { status.textContent = ""; return; }
    var found = 0;
    var names = {};
    data.clusters.forEach(function (c) {
      names[c[0]] = c[1];
      if (matches(c[1] + " " + c[2].join(" "), needles)) {
        found++;
        if (found <= LIMIT) { list.appendChild(item("cluster", c[1], c[2].slice(0, 5).join(", "), c[3])); }
      }
    });
    data.docs.forEach(function (d) {
      if (matches(d[0] + " " + d[1], needles)) {
        found++;
        if (found <= LIMIT) { list.appendChild(item("document", d[0], "in cluster " + d[2] + (names[d[2]] ? ": " + names[d[2]] : ""), d[3])); }
      }
    });
    status.textContent = found === 0 ? "nothing found" :
      (found > LIMIT ? "first " + LIMIT + " of " + found + " matches" : found + (found === 1 ? " match" : " matches")) +
      " (searched: " + data.searched + ")";
  }

  // keyboard: Down from the box moves to the first result, Up/Down move between results, Escape returns
  function links() { return Array.prototype.slice.call(list.querySelectorAll("a")); }
  function move(event) {
    var all = links();
    var at = all.indexOf(document.activeElement);
    if (event.key === "ArrowDown" && all.length > 0) {
      all[Math.min(at + 1, all.length - 1)].focus();
      event.preventDefault();
    } else if (event.key === "ArrowUp" && at >= 0) {
      (at === 0 ? input : all[at - 1]).focus();
      event.preventDefault();
    } else if (event.key === "Escape") {
      input.focus();
      if (at < 0) { input.value = ""; search(); }
      event.preventDefault();
    }
  }

  input.addEventListener("input", search);
  input.addEventListener("keydown", move);
  list.addEventListener("keydown", move);
  form.addEventListener("submit", function (event) { event.preventDefault(); search(); });
})();
