/* Search over the atlas, in the reader's browser, offline and from disk.
 *
 * The index is data/search.js (window.AtlasData.search), built with the site: each entry has
 * its kind (k), title (t), link from the site root (h), a line of context (c), and its search
 * words already normalised: title words (tw) and other words (w), separated by spaces.
 * A query is normalised the same way (NFD, combining marks removed, lower case, split on what
 * is not a letter or digit). An entry matches when every query word begins one of its words;
 * entries whose title holds every query word come first, then those whose title holds some.
 * No eval, no inline handlers, no request: the page works under a strict CSP and from file://.
 */
(function () {
  "use strict";

  var MAX_SHOWN = 100;
  var KINDS = {object: "Object", character: "Character", place: "Place", page: "Page",
               clade: "Clade"};
  // The page may give these texts in its language (data-text-* on #search-form); {total},
  // {count}, {query} and {max} are filled in here.
  var TEXTS = {prompt: "Type a word to search {total} entries.",
               none: "No results for \u201c{query}\u201d.",
               one: "1 result for \u201c{query}\u201d.",
               many: "{count} results for \u201c{query}\u201d.",
               more: "Showing the first {max}."};

  // Counts in the page's language (<html lang>): 1 234 in French, 1,234 in English.
  var NUMBERS = (function () {
    try { return new Intl.NumberFormat(document.documentElement.lang || "en"); }
    catch (e) { return null; }
  })();
  function say(key, values) {
    return TEXTS[key].replace(/\{(\w+)\}/g, function (all, name) {
      if (!(name in values)) return all;
      var v = values[name];
      return typeof v === "number" && NUMBERS ? NUMBERS.format(v) : String(v);
    });
  }

  function readTexts(form) {
    Object.keys(TEXTS).forEach(function (key) {
      var given = form.getAttribute("data-text-" + key);
      if (given) { TEXTS[key] = given; }
    });
    try {
      var kinds = JSON.parse(form.getAttribute("data-text-kinds") || "{}");
      Object.keys(kinds).forEach(function (k) { KINDS[k] = kinds[k]; });
    } catch (e) { /* keep the English names */ }
  }

  function normalise(text) {
    return text.normalize("NFD").replace(/\p{M}/gu, "").toLowerCase();
  }

  function tokens(text) {
    return normalise(text).match(/[\p{L}\p{N}]+/gu) || [];
  }

  function split(text) {
    return text ? text.split(" ") : [];
  }

  function prepare(entries) {
    return entries.map(function (e, order) {
      return {entry: e, title: split(e.tw), other: split(e.w), order: order};
    });
  }

  function begins(list, word) {
    var exact = false;
    var found = false;
    for (var i = 0; i < list.length; i++) {
      if (list[i].lastIndexOf(word, 0) === 0) {
        found = true;
        if (list[i].length === word.length) { exact = true; break; }
      }
    }
    return found ? (exact ? 2 : 1) : 0;
  }

  /* The matching entries, best first. */
  function search(prepared, query) {
    var words = tokens(query);
    if (!words.length) { return []; }
    var hits = [];
    prepared.forEach(function (p) {
      var inTitle = 0;
      var exact = 0;
      for (var i = 0; i < words.length; i++) {
        var t = begins(p.title, words[i]);
        var o = t ? 0 : begins(p.other, words[i]);
        if (!t && !o) { return; }
        if (t) { inTitle += 1; }
        if (t === 2 || o === 2) { exact += 1; }
      }
      var tier = inTitle === words.length ? 0 : (inTitle ? 1 : 2);
      hits.push({p: p, tier: tier, exact: exact});
    });
    hits.sort(function (a, b) {
      return a.tier - b.tier || b.exact - a.exact ||
        a.p.entry.t.length - b.p.entry.t.length || a.p.order - b.p.order;
    });
    return hits.map(function (h) { return h.p.entry; });
  }

  function show(list, status, root, query, hits, total) {
    list.textContent = "";
    if (!tokens(query).length) {
      status.textContent = say("prompt", {total: total});
      return;
    }
    hits.slice(0, MAX_SHOWN).forEach(function (e) {
      var li = document.createElement("li");
      var a = document.createElement("a");
      a.href = root + e.h;
      a.textContent = e.t;
      var kind = document.createElement("span");
      kind.className = "search-kind";
      kind.textContent = KINDS[e.k] || e.k;
      li.appendChild(a);
      li.appendChild(document.createTextNode(" "));
      li.appendChild(kind);
      if (e.c) {
        var context = document.createElement("span");
        context.className = "search-context";
        context.textContent = e.c;
        li.appendChild(document.createTextNode(" "));
        li.appendChild(context);
      }
      list.appendChild(li);
    });
    var n = hits.length;
    var text = say(n === 0 ? "none" : n === 1 ? "one" : "many", {count: n, query: query});
    if (n > MAX_SHOWN) { text += " " + say("more", {max: MAX_SHOWN}); }
    status.textContent = text;
  }

  function start() {
    var data = (window.AtlasData || {}).search;
    var form = document.getElementById("search-form");
    var input = document.getElementById("search-q");
    var list = document.getElementById("search-results");
    var status = document.getElementById("search-status");
    var button = document.getElementById("search-go");
    if (!data || !form || !input || !list || !status) { return; }
    readTexts(form);
    var root = document.body.getAttribute("data-root") || "";
    var prepared = prepare(data.entries);
    var timer = null;
    document.documentElement.classList.add("has-search");

    function run() {
      var query = input.value.trim();
      show(list, status, root, query, search(prepared, query), prepared.length);
    }

    input.addEventListener("input", function () {
      window.clearTimeout(timer);
      timer = window.setTimeout(run, 120);
    });
    function now() {
      window.clearTimeout(timer);
      run();
      try {
        window.history.replaceState(null, "", "?q=" + encodeURIComponent(input.value.trim()));
      } catch (err) { /* some browsers refuse this under file://; the search still ran */ }
    }
    input.addEventListener("keydown", function (event) {
      if (event.key === "Enter") { event.preventDefault(); now(); }
    });
    if (button) { button.addEventListener("click", now); }
    /* Arrow keys move between the input and the result links. */
    form.parentNode.addEventListener("keydown", function (event) {
      if (event.key !== "ArrowDown" && event.key !== "ArrowUp") { return; }
      var links = Array.prototype.slice.call(list.querySelectorAll("a"));
      if (!links.length) { return; }
      var at = links.indexOf(document.activeElement);
      if (document.activeElement !== input && at < 0) { return; }
      event.preventDefault();
      if (event.key === "ArrowDown") {
        links[Math.min(at + 1, links.length - 1)].focus();
      } else if (at <= 0) {
        input.focus();
      } else {
        links[at - 1].focus();
      }
    });
    var initial = new URLSearchParams(window.location.search).get("q");
    if (initial) { input.value = initial; }
    run();
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
}());
