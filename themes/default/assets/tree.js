/* Lineage tree: draws window.AtlasData.tree into #lineage-tree with plotly, and wires the
 * tree page's own controls (the form #tree-controls) to it.
 *
 * Data (written by the site builder):
 *   data/tree.js     AtlasData.tree = {nodes: [{id, kind: "tip" | "node", x, y, parent, label,
 *                    href, support, withheld}], x_title, outgroup: [ids], x_axis}
 *   data/states.js   AtlasData.states = {n_nodes, characters: [{id, label, group, symbols,
 *                    descriptions, k, p: flat node-major probabilities, changes: per node}],
 *                    total_changes: per node} (optional: without it there is no shading)
 *   data/contacts.js AtlasData.contacts = [{source, target, characters, note}] (optional)
 * Nodes come in postorder (children before parents), `parent` is an index into `nodes` (-1 for
 * the root), `x` is the depth from the root and `y` the vertical slot (tips 0..n-1). The states
 * and contacts refer to nodes by the same index.
 *
 * What the reader can change (state below, one plotly redraw per change):
 *   layout     "rect" (elbow branches, x = depth) or "radial" (angle = tip slot, radius = depth)
 *   lengths    "given" (branch lengths of the data) or "equal" (one step per branch, tips
 *              aligned at the deepest level)
 *   collapse   support threshold: the topmost clades below it are drawn as one triangle with a
 *              count of their objects (0: nothing collapsed)
 *   shade      "" (plain), "changes" (expected changes of all traits per branch) or a character
 *              id; with a character, `mode` is "most" (colour of the most probable state, paler
 *              when less certain), "p<k>" (probability of state k) or "changes" (this trait)
 *   found      tips whose names match the search box: drawn with their path to the root
 *   contacts   declared contacts drawn as dashed arcs between the nodes they join
 * A plot div with data-character="ID" (a character's page) starts shaded by that character.
 *
 * Colours: states use the palette of Okabe & Ito (2008, "Color Universal Design", J*Fly), and
 * graded values the sequential "YlOrBr" scheme of Tol (2021, "Colour schemes", SRON technical
 * note SRON/EPS/TN/09-002), both chosen to stay distinct for colour-blind readers. Every colour
 * has an entry in the plot's legend.
 *
 * No globals are created, no inline script or handler is needed (the CSP forbids them). If
 * plotly or the data is missing, nothing is drawn, the empty box is hidden (class
 * plot-unavailable), the controls stay hidden and the page's static figure and text remain.
 */
(function () {
  "use strict";

  var TIP_ROW_PX = 18; // vertical room per tip before the plot grows past its CSS height
  var LABEL_CHAR_PX = 7.2; // rough width of one label character at 12 px, for the margin
  var PAPER_WIDTH_PX = 660; // printed width: A4 or US Letter less margins, at 96 px per inch
  var PAPER_MAX_HEIGHT_PX = 900; // one printed page
  var MANY_TIPS = 300; // above this, on screen: names in the hover box, tips as one shape of
  // discs, forks without markers (see nodeMarkers in buildFigure)

  // Okabe & Ito (2008): orange, sky blue, bluish green, yellow, blue, vermillion, reddish
  // purple, then grey for anything beyond seven states.
  var STATE_COLOURS = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00",
    "#CC79A7", "#999999"];
  // Tol (2021) YlOrBr, the six darker steps (the palest are invisible on a white page).
  var GRADED = ["#FEC44F", "#FB9A29", "#EC7014", "#CC4C02", "#993404", "#662506"];
  var CONTACT_COLOUR = "#CC79A7";
  var CERTAINTY = [ // the steps of certainty of the most probable state, palest first
    { below: 0.5, alpha: 0.3 },
    { below: 0.7, alpha: 0.5 },
    { below: 0.9, alpha: 0.75 },
    { below: Infinity, alpha: 1 },
  ];

  // Every word the tree writes (hover boxes, key, axis, status line, the state menu), in
  // English. A page in another language gives them as data-text-* attributes on the plot's
  // box (data-text-collapsed-hover for collapsedHover; templates/macros.html, tree_texts);
  // {names} are filled in by say().
  var WORDS = {
    support: "Support",
    withheld: "Withheld",
    key: "Key",
    branch: "Branch",
    objects: "{n} objects",
    tip: "Object (opens its page)",
    clade: "Clade (number: support; opens its trait sheet)",
    cladeHover: "Clade: point at a fork for its support; select it to open its trait sheet",
    steps: "Steps from the root",
    foundPath: "Path to the object found",
    collapsed: "Collapsed clade (number of objects)",
    collapsedHover: "{n} objects, collapsed (support {support})",
    contact: "Declared contact",
    contactTraits: "Traits: {traits}",
    changesBetween: "{low} to {high} changes",
    changesAtLeast: "{low} or more changes",
    changesValue: "Expected changes on the branch: {value}",
    changesValueTrait: "Expected changes on the branch ({trait}): {value}",
    changesTitle: "Changes per branch, all traits",
    changesTitleTrait: "Changes per branch: {trait}",
    probBetween: "probability {low} to {high}",
    probAtLeast: "probability {low} or more",
    probValue: "Probability of {state}: {value}",
    probTitle: "{trait}: probability of {state}",
    mostBelow: "{state}, probability below {high}",
    mostBetween: "{state}, probability {low} to {high}",
    mostAtLeast: "{state}, probability {low} or more",
    mostValue: "Most probable: {state} ({value})",
    mostTitle: "{trait}: most probable state (paler: less certain)",
    state: "state {symbol}",
    stateDescribed: "state {symbol} ({description})",
    allTraits: "All traits together",
    chooseTrait: "Choose a trait first",
    mostOption: "Most probable state",
    probOption: "Probability of {state}",
    changesOption: "Changes per branch (this trait)",
    noCollapse: "none",
    findPrompt: "Type part of an object's name to find it.",
    findNone: "No object matches \u201c{query}\u201d.",
    findOne: "Found {name}; its path to the root is highlighted.",
    findMany: "Found {n} objects matching \u201c{query}\u201d; their paths to the root are " +
      "highlighted.",
    // plotly's own tool bar, by its English titles
    plotZoom: "Zoom",
    plotPan: "Pan",
    plotZoomIn: "Zoom in",
    plotZoomOut: "Zoom out",
    plotReset: "Reset axes",
    plotDownload: "Download plot",
  };
  var PLOTLY_KEYS = ["plotZoom", "plotPan", "plotZoomIn", "plotZoomOut", "plotReset",
    "plotDownload"];

  // Plain text: the caller escapes it where plotly reads markup.
  function say(text, values) {
    return text.replace(/\{(\w+)\}/g, function (all, name) {
      return values && name in values ? String(values[name]) : all;
    });
  }

  // Numbers in the page's language (<html lang>), with cached formatters: a hover box per
  // point is written at every draw.
  var PAGE_LANG = document.documentElement.lang || "en";
  var NUMBER_FORMATS = {};
  function numberFormat(options) {
    try {
      return new Intl.NumberFormat(PAGE_LANG, options);
    } catch (err) { // an unknown language tag
      return new Intl.NumberFormat("en", options);
    }
  }
  function localNumber(value, minDigits, maxDigits) {
    var key = minDigits + ":" + maxDigits;
    var f = NUMBER_FORMATS[key];
    if (!f) {
      f = NUMBER_FORMATS[key] = numberFormat({ minimumFractionDigits: minDigits,
        maximumFractionDigits: maxDigits });
    }
    return f.format(value);
  }

  // plotly's "separators" (decimal mark, then thousands) for the axis numbers.
  function separators() {
    var parts = numberFormat({}).formatToParts(12345.5);
    var decimal = ".";
    var group = ",";
    parts.forEach(function (p) {
      if (p.type === "decimal") decimal = p.value;
      if (p.type === "group") group = p.value;
    });
    return decimal + group;
  }
  var PROB_BINS = [0.2, 0.4, 0.6, 0.8, 0.95, Infinity]; // upper bounds, one per GRADED colour
  var CHANGE_BINS = [0.05, 0.25, 0.5, 1, 2, Infinity];

  function cssVar(name, fallback) {
    var value = getComputedStyle(document.documentElement).getPropertyValue(name).trim();
    return value || fallback;
  }

  function escapeText(text) {
    return String(text)
      .replace(/&/g, "&amp;")
      .replace(/</g, "&lt;")
      .replace(/>/g, "&gt;")
      .replace(/"/g, "&quot;");
  }

  // Only site-relative links are followed: no scheme, no leading slash, no "//".
  function siteHref(href) {
    if (typeof href !== "string" || href === "") return null;
    if (/^[a-z][a-z0-9+.-]*:/i.test(href) || href.charAt(0) === "/" || href.charAt(0) === "\\") {
      return null;
    }
    return (document.body.dataset.root || "") + href;
  }

  function formatSupport(value) {
    return typeof value === "number" && isFinite(value) ? localNumber(value, 2, 2) : null;
  }

  function isAgeAxis(tree) {
    if (tree.x_axis === "age") return true;
    if (tree.x_axis === "depth") return false;
    return /before/i.test(tree.x_title || "");
  }

  function validNodes(tree) {
    var nodes = tree && tree.nodes;
    if (!Array.isArray(nodes) || nodes.length === 0) return null;
    for (var i = 0; i < nodes.length; i++) {
      var n = nodes[i];
      if (!n || typeof n.x !== "number" || typeof n.y !== "number") return null;
      var p = n.parent;
      // postorder: a parent always comes after its children (-1 for the root)
      if (!Number.isInteger(p) || (p !== -1 && (p <= i || p >= nodes.length))) return null;
    }
    return nodes;
  }

  function validStates(states, n) {
    if (!states || states.n_nodes !== n || !Array.isArray(states.characters)) return null;
    return states;
  }

  function validContacts(contacts, n) {
    if (!Array.isArray(contacts)) return [];
    return contacts.filter(function (c) {
      return c && Number.isInteger(c.source) && Number.isInteger(c.target) &&
        c.source >= 0 && c.source < n && c.target >= 0 && c.target < n;
    });
  }

  // The display name; a withheld object never shows its id, only the label the builder gave.
  function tipName(n, words) {
    return String(n.withheld ? n.label || words.withheld : n.label || n.id);
  }

  function shorten(text, max) {
    return text.length <= max ? text : text.slice(0, Math.max(1, max - 1)).trimEnd() + "\u2026";
  }

  function interfaceWords(div) {
    var words = {};
    Object.keys(WORDS).forEach(function (key) {
      var given = div.dataset["text" + key.charAt(0).toUpperCase() + key.slice(1)];
      words[key] = given || WORDS[key];
    });
    return words;
  }

  function rgba(hex, alpha) {
    var v = parseInt(hex.slice(1), 16);
    return "rgba(" + ((v >> 16) & 255) + "," + ((v >> 8) & 255) + "," + (v & 255) + "," +
      alpha + ")";
  }

  function binOf(bounds, value) {
    for (var b = 0; b < bounds.length; b++) if (value < bounds[b]) return b;
    return bounds.length - 1;
  }

  // ---- The tree's own arrays, computed once ----------------------------------------------

  function indexTree(nodes) {
    var n = nodes.length;
    var height = new Float64Array(n);
    var minY = new Float64Array(n);
    var maxY = new Float64Array(n);
    var maxX = new Float64Array(n);
    var count = new Int32Array(n);
    var root = n - 1;
    var i;
    for (i = 0; i < n; i++) {
      minY[i] = Infinity;
      maxY[i] = -Infinity;
      maxX[i] = -Infinity;
    }
    var tips = [];
    var inner = [];
    for (i = 0; i < n; i++) {
      var node = nodes[i];
      if (node.kind === "tip") {
        tips.push(i);
        minY[i] = maxY[i] = node.y;
        count[i] = 1;
      } else {
        inner.push(i);
      }
      if (node.x > maxX[i]) maxX[i] = node.x;
      var p = node.parent;
      if (p < 0) {
        root = i;
        continue;
      }
      height[p] = Math.max(height[p], height[i] + 1);
      minY[p] = Math.min(minY[p], minY[i]);
      maxY[p] = Math.max(maxY[p], maxY[i]);
      maxX[p] = Math.max(maxX[p], maxX[i]);
      count[p] += count[i];
    }
    var equalX = new Float64Array(n);
    for (i = 0; i < n; i++) equalX[i] = height[root] - height[i];
    // Children of each node, in index order: kids[first[v] .. first[v + 1]).
    var first = new Int32Array(n + 1);
    for (i = 0; i < n; i++) if (nodes[i].parent >= 0) first[nodes[i].parent + 1]++;
    for (i = 0; i < n; i++) first[i + 1] += first[i];
    var fill = first.slice(0, n);
    var kids = new Int32Array(Math.max(n - 1, 0));
    for (i = 0; i < n; i++) if (nodes[i].parent >= 0) kids[fill[nodes[i].parent]++] = i;
    return { n: n, root: root, tips: tips, inner: inner, equalX: equalX, minY: minY, maxY: maxY,
      count: count, height: height, first: first, kids: kids };
  }

  // Topmost clades below the support threshold (collapsed) and everything under them (hidden).
  function collapsedClades(nodes, index, threshold) {
    var n = nodes.length;
    var hidden = new Uint8Array(n);
    var collapsed = new Uint8Array(n);
    if (!(threshold > 0)) return { hidden: hidden, collapsed: collapsed, list: [] };
    var list = [];
    for (var i = n - 1; i >= 0; i--) { // parents before children
      var p = nodes[i].parent;
      if (p >= 0 && (hidden[p] || collapsed[p])) {
        hidden[i] = 1;
        continue;
      }
      var s = nodes[i].support;
      if (nodes[i].kind !== "tip" && i !== index.root && typeof s === "number" && s < threshold) {
        collapsed[i] = 1;
        list.push(i);
      }
    }
    return { hidden: hidden, collapsed: collapsed, list: list };
  }

  // Indices of the found nodes and of every node on their paths to the root.
  function pathsToRoot(nodes, targets) {
    var marked = new Set();
    targets.forEach(function (i) {
      var guard = 0;
      while (i >= 0 && !marked.has(i) && guard++ <= nodes.length) {
        marked.add(i);
        i = nodes[i].parent;
      }
    });
    return marked;
  }

  // ---- Shading: a colour class per node (the branch above it takes the node's class) ------

  function shadeClasses(state, data) {
    var words = data.words;
    var n = data.nodes.length;
    var states = data.states;
    var none = { classes: null, legend: [], value: null, title: "" };
    if (!states || !state.shade) return none;
    var cls = new Int32Array(n);
    var legend = [];
    var values = new Float64Array(n);
    var describe;
    if (state.shade === "changes" || state.mode === "changes") {
      var ch = state.shade === "changes" ? null : characterById(states, state.shade);
      if (state.shade !== "changes" && !ch) return none;
      var series = ch ? ch.changes : states.total_changes;
      if (!Array.isArray(series) || series.length !== n) return none;
      for (var i = 0; i < n; i++) {
        values[i] = Number(series[i]) || 0;
        cls[i] = binOf(CHANGE_BINS, values[i]);
      }
      var lower = [0].concat(CHANGE_BINS.slice(0, -1));
      GRADED.forEach(function (colour, b) {
        var ends = { low: localNumber(lower[b], 0, 2), high: localNumber(CHANGE_BINS[b], 0, 2) };
        legend.push({ colour: colour, name: say(b === GRADED.length - 1 ? words.changesAtLeast
          : words.changesBetween, ends) });
      });
      describe = function (v) {
        var value = localNumber(values[v], 2, 2);
        return escapeText(ch ? say(words.changesValueTrait, { trait: ch.label, value: value })
          : say(words.changesValue, { value: value }));
      };
      return { classes: cls, legend: legend, describe: describe,
        title: ch ? say(words.changesTitleTrait, { trait: ch.label }) : words.changesTitle };
    }
    var c = characterById(states, state.shade);
    if (!c || !Array.isArray(c.p) || c.p.length !== n * c.k) return none;
    var k = c.k;
    if (/^p\d+$/.test(state.mode)) {
      var s = Math.min(parseInt(state.mode.slice(1), 10), k - 1);
      for (var v = 0; v < n; v++) {
        values[v] = c.p[v * k + s];
        cls[v] = binOf(PROB_BINS, values[v]);
      }
      var lo = [0].concat(PROB_BINS.slice(0, -1));
      GRADED.forEach(function (colour, b) {
        var ends = { low: localNumber(lo[b], 0, 2), high: localNumber(PROB_BINS[b], 0, 2) };
        legend.push({ colour: colour, name: say(b === GRADED.length - 1 ? words.probAtLeast
          : words.probBetween, ends) });
      });
      describe = function (u) {
        return escapeText(say(words.probValue, { state: stateWords(c, s, words),
          value: localNumber(values[u], 3, 3) }));
      };
      return { classes: cls, legend: legend, describe: describe,
        title: say(words.probTitle, { trait: c.label, state: stateWords(c, s, words) }) };
    }
    // Most probable state; the class packs (state, certainty step).
    var steps = CERTAINTY.length;
    var best = new Int32Array(n);
    for (var u = 0; u < n; u++) {
      var top = 0;
      for (var j = 1; j < k; j++) if (c.p[u * k + j] > c.p[u * k + top]) top = j;
      best[u] = top;
      values[u] = c.p[u * k + top];
      cls[u] = top * steps + binOf(CERTAINTY.map(function (x) { return x.below; }), values[u]);
    }
    for (var t = 0; t < k; t++) {
      for (var q = 0; q < steps; q++) {
        var step = { state: stateWords(c, t, words),
          low: q > 0 ? localNumber(CERTAINTY[q - 1].below, 0, 2) : "",
          high: isFinite(CERTAINTY[q].below) ? localNumber(CERTAINTY[q].below, 0, 2) : "" };
        legend.push({ colour: rgba(stateColour(t), CERTAINTY[q].alpha),
          name: say(q === 0 ? words.mostBelow : q === steps - 1 ? words.mostAtLeast
            : words.mostBetween, step),
          group: "state-" + t });
      }
    }
    describe = function (w) {
      return escapeText(say(words.mostValue, { state: stateWords(c, best[w], words),
        value: localNumber(values[w], 3, 3) }));
    };
    return { classes: cls, legend: legend, describe: describe,
      title: say(words.mostTitle, { trait: c.label }) };
  }

  function stateColour(t) {
    return STATE_COLOURS[Math.min(t, STATE_COLOURS.length - 1)];
  }

  function stateWords(c, s, words) {
    var desc = c.descriptions && c.descriptions[s];
    return desc && desc !== c.symbols[s]
      ? say(words.stateDescribed, { symbol: c.symbols[s], description: desc })
      : say(words.state, { symbol: c.symbols[s] });
  }

  function characterById(states, id) {
    for (var i = 0; i < states.characters.length; i++) {
      if (states.characters[i].id === id) return states.characters[i];
    }
    return null;
  }

  // ---- Geometry -------------------------------------------------------------------------

  function geometry(state, data) {
    var nodes = data.nodes;
    var index = data.index;
    var n = nodes.length;
    var depth = new Float64Array(n);
    var maxDepth = 0;
    for (var i = 0; i < n; i++) {
      depth[i] = state.lengths === "equal" ? index.equalX[i] : nodes[i].x;
      if (depth[i] > maxDepth) maxDepth = depth[i];
    }
    var nTips = Math.max(index.tips.length, 1);
    var radial = state.layout === "radial";
    var age = !radial && state.lengths !== "equal" && isAgeAxis(data.tree);
    var far = new Float64Array(n); // the deepest tip below each node
    for (var f = 0; f < n; f++) {
      far[f] = Math.max(far[f], depth[f]);
      if (nodes[f].parent >= 0) far[nodes[f].parent] = Math.max(far[nodes[f].parent], far[f]);
    }
    var X = new Float64Array(n);
    var Y = new Float64Array(n);
    var angle = function (y) {
      return (2 * Math.PI * y) / nTips;
    };
    var R = function (d) {
      return d;
    };
    for (var v = 0; v < n; v++) {
      if (radial) {
        X[v] = depth[v] * Math.cos(angle(nodes[v].y));
        Y[v] = depth[v] * Math.sin(angle(nodes[v].y));
      } else {
        X[v] = age ? maxDepth - depth[v] : depth[v];
        Y[v] = nodes[v].y;
      }
    }
    // The point at depth d on the ray (radial) or row (rectangular) of slot y.
    function at(d, y) {
      if (radial) return [R(d) * Math.cos(angle(y)), R(d) * Math.sin(angle(y))];
      return [age ? maxDepth - d : d, y];
    }
    // The branch from parent p to child c (an elbow, or an arc at the parent's radius then a
    // ray), pushed without its first point; `back` walks it from c to p instead, without c.
    function walk(p, c, xs, ys, back) {
      if (!radial) {
        if (back) {
          xs.push(X[p], X[p]);
          ys.push(Y[c], Y[p]);
        } else {
          xs.push(X[p], X[c]);
          ys.push(Y[c], Y[c]);
        }
        return;
      }
      var a0 = angle(nodes[p].y);
      var a1 = angle(nodes[c].y);
      var steps = Math.max(1, Math.ceil(Math.abs(a1 - a0) / 0.06));
      var s;
      if (!back) {
        for (s = 1; s <= steps; s++) {
          xs.push(depth[p] * Math.cos(a0 + ((a1 - a0) * s) / steps));
          ys.push(depth[p] * Math.sin(a0 + ((a1 - a0) * s) / steps));
        }
        xs.push(X[c]);
        ys.push(Y[c]);
        return;
      }
      for (s = steps; s >= 0; s--) {
        xs.push(depth[p] * Math.cos(a0 + ((a1 - a0) * s) / steps));
        ys.push(depth[p] * Math.sin(a0 + ((a1 - a0) * s) / steps));
      }
    }
    // rounding of shape coordinates, by their extent: depth (the radius) and the tip slots
    var q = { x: quantum(maxDepth), y: radial ? quantum(maxDepth) : quantum(nTips) };
    return { X: X, Y: Y, depth: depth, far: far, maxDepth: maxDepth, radial: radial, age: age,
      walk: walk, at: at, angle: angle, nTips: nTips, q: q };
  }

  // The branches above the nodes v with include(v) as an SVG path in data coordinates, for
  // a plotly shape: "M" to each parent, "L" along the branch.
  function branchShapePath(g, nodes, include) {
    var parts = [];
    var xs = [];
    var ys = [];
    for (var v = 0; v < nodes.length; v++) {
      var p = nodes[v].parent;
      if (p < 0 || !include(v)) continue;
      xs.length = 0;
      ys.length = 0;
      g.walk(p, v, xs, ys, false);
      var d = "M" + num(g.X[p], g.q.x) + "," + num(g.Y[p], g.q.y);
      for (var k = 0; k < xs.length; k++) d += "L" + num(xs[k], g.q.x) + "," + num(ys[k], g.q.y);
      parts.push(d);
    }
    return parts.join("") || "M0,0";
  }

  // The branches above the nodes v with include(v) (the path to an object found), as few
  // polylines as possible: a walk down each connected part of the tree and back up, with a
  // gap (null) only between parts, since plotly makes one SVG path per gap-separated piece
  // (the 1,999 branches of a 1,000-tip tree as separate pieces took about 450 ms to draw,
  // as one piece about 40 ms; benchmarks/bench_tree_browser.py).
  function branchPaths(g, index, include) {
    var xs = [];
    var ys = [];
    var here = -1; // the node the polyline stands at (-1: the next part needs a gap)
    var stack = [index.root];
    var next = [index.first[index.root]];
    var drawn = [false];
    while (stack.length) {
      var top = stack.length - 1;
      var v = stack[top];
      if (next[top] >= index.first[v + 1]) { // every child done: climb back to the parent
        stack.pop();
        next.pop();
        if (drawn.pop()) {
          var p = stack[stack.length - 1];
          if (here === v) {
            g.walk(p, v, xs, ys, true);
            here = p;
          } else {
            here = -1;
          }
        }
        continue;
      }
      var c = index.kids[next[top]++];
      var use = Boolean(include(c));
      if (use) {
        if (here !== v) {
          if (xs.length) {
            xs.push(null);
            ys.push(null);
          }
          xs.push(g.X[v]);
          ys.push(g.Y[v]);
        }
        g.walk(v, c, xs, ys, false);
        here = c;
      }
      stack.push(c);
      next.push(index.first[c]);
      drawn.push(use);
    }
    return { x: xs, y: ys };
  }

  // Filled discs of radii rx, ry (data units) centred on the points, as the path of one
  // plotly shape (filled under the non-zero rule). Plotly gives every marker an SVG element
  // of its own and styles it twice: 1,000 tip markers took about 190 ms of main-thread time
  // in the first draw of a 1,000-tip tree, the same discs as one shape about 50 ms (headless
  // Chromium, the plot of benchmarks/bench_tree_browser.py). With `hole` (a fraction of the
  // radius) each disc is a ring: the inner circle runs the other way round, so it is left out.
  var DISC_SIDES = 8; // an octagon of 4 px radius looks round
  var DISC_COS = [];
  var DISC_SIN = [];
  for (var side = 0; side < DISC_SIDES; side++) {
    DISC_COS.push(Math.cos((2 * Math.PI * side) / DISC_SIDES));
    DISC_SIN.push(Math.sin((2 * Math.PI * side) / DISC_SIDES));
  }

  function discPath(xs, ys, rx, ry, hole, q) {
    var parts = [];
    function circle(x, y, f, sign) {
      var d = "";
      for (var s = 0; s < DISC_SIDES; s++) {
        var k = sign > 0 ? s : (DISC_SIDES - s) % DISC_SIDES;
        d += (s ? "L" : "M") + num(x + f * rx * DISC_COS[k], q.x) + "," +
          num(y + f * ry * DISC_SIN[k], q.y);
      }
      return d + "Z";
    }
    for (var i = 0; i < xs.length; i++) {
      parts.push(circle(xs[i], ys[i], 1, 1));
      if (hole) parts.push(circle(xs[i], ys[i], hole, -1));
    }
    return parts.join("") || "M0,0";
  }

  // A coordinate for a shape's path, rounded to a multiple of 1/q (q from quantum(): seven
  // digits of the extent of that axis, far finer than a pixel). An integer divided by a power of
  // ten prints as the short decimal it stands for.
  function num(v, q) {
    return String(Math.round(v * q) / q);
  }

  function quantum(span) {
    return Math.pow(10, 7 - Math.ceil(Math.log10(span > 0 ? span : 1)));
  }

  // Pixels per data unit of a layout about to be drawn (the key above the plot, which plotly
  // fits in later, makes the plot a little shorter: the discs come out a little flatter).
  function layoutScale(layout, width, height) {
    var m = layout.margin;
    var w = Math.max(1, width - m.l - m.r);
    var h = Math.max(1, height - m.t - m.b);
    var sx = w / Math.abs(layout.xaxis.range[1] - layout.xaxis.range[0]);
    var sy = h / Math.abs(layout.yaxis.range[1] - layout.yaxis.range[0]);
    if (layout.yaxis.scaleanchor) sx = sy = Math.min(sx, sy);
    return { x: sx, y: sy };
  }

  // Pixels per data unit of the plot as drawn (plotly's axis scale), or null.
  function drawnScale(div) {
    var full = div._fullLayout;
    var mx = full && full.xaxis && full.xaxis._m;
    var my = full && full.yaxis && full.yaxis._m;
    if (!(isFinite(mx) && isFinite(my) && mx && my)) return null;
    return { x: Math.abs(mx), y: Math.abs(my) };
  }

  // ---- The figure -------------------------------------------------------------------------

  function screenColours() {
    return {
      fg: cssVar("--fg", "#1c1f23"),
      muted: cssVar("--muted", "#565c63"),
      branch: cssVar("--border-strong", "#8a877f"),
      accent: cssVar("--accent", "#a4470e"),
      bg: cssVar("--bg", "#ffffff"),
      surface: cssVar("--surface", "#f4f3ef"),
      border: cssVar("--border", "#cfccc4"),
      link: cssVar("--link", "#1a5a92"),
    };
  }

  var PAPER = {
    fg: "#000000",
    muted: "#333333",
    branch: "#555555",
    accent: "#000000",
    bg: "#ffffff",
    surface: "#ffffff",
    border: "#999999",
    link: "#000000",
  };

  function buildFigure(div, data, state, colours, width, height, scale) {
    var nodes = data.nodes;
    var index = data.index;
    var font = getComputedStyle(document.body).fontFamily || "sans-serif";
    var words = data.words;
    var g = geometry(state, data);
    var fold = collapsedClades(nodes, index, state.collapse);
    var shade = shadeClasses(state, data);
    var outgroup = new Set(Array.isArray(data.tree.outgroup) ? data.tree.outgroup : []);
    var targets = new Set(state.found);
    var onPath = pathsToRoot(nodes, state.found);
    var span = g.maxDepth > 0 ? g.maxDepth : 1;
    var maxChars = Math.max(8, Math.floor((width * 0.45 - 24) / LABEL_CHAR_PX));
    // Radial trees keep their names in the hover box (horizontal labels would overlap).
    var showLabels = (index.tips.length <= MANY_TIPS || state.paper) && !g.radial;
    var traces = [];

    // Branches: one SVG path (a plotly shape) per colour class, under the traces; the key
    // gets an entry from a trace without points in the same colour. As line traces, the
    // branches of a class spread over the tree (shading by a trait) are many pieces, and
    // plotly draws and styles an element per piece: shading a 1,000-tip tree by a trait took
    // about 310 ms of main-thread time that way, as shapes about 40 ms
    // (benchmarks/bench_tree_browser.py).
    var classes = new Set();
    for (var i = 0; i < nodes.length; i++) {
      if (nodes[i].parent >= 0 && !fold.hidden[i]) {
        classes.add(shade.classes ? shade.classes[i] : -1);
      }
    }
    var shapes = [];
    var shownLegend = new Set();
    Array.from(classes).sort(function (a, b) { return a - b; }).forEach(function (key) {
      var entry = key >= 0 ? shade.legend[key] : null;
      var colour = entry ? entry.colour : colours.branch;
      var width = entry ? 2.5 : 1.5;
      shapes.push({
        type: "path", layer: "between", xref: "x", yref: "y",
        path: branchShapePath(g, nodes, function (v) {
          return !fold.hidden[v] && (shade.classes ? shade.classes[v] : -1) === key;
        }),
        line: { color: colour, width: width },
      });
      var name = entry ? entry.name : words.branch;
      if (shownLegend.has(name)) return;
      shownLegend.add(name);
      traces.push({
        type: "scatter", mode: "lines", x: [null], y: [null], hoverinfo: "skip",
        name: escapeText(name), // plotly reads names as markup
        legendgroup: entry ? entry.group || "class-" + key : "branches",
        line: { color: colour, width: width },
        meta: "branches",
      });
    });

    // The path to each object found by the search box.
    if (onPath.size > 0) {
      var path = branchPaths(g, index, function (v) {
        return onPath.has(v) && !fold.hidden[v];
      });
      traces.push({
        type: "scatter", mode: "lines", x: path.x, y: path.y, hoverinfo: "skip",
        name: escapeText(words.foundPath),
        line: { color: colours.accent, width: 4, simplify: false },
        meta: "found-path",
      });
    }

    // Collapsed clades: a triangle from the clade's node to the span of its tips.
    if (fold.list.length) {
      var tri = { x: [], y: [] };
      var mark = { x: [], y: [], text: [], hover: [], href: [] };
      fold.list.forEach(function (v) {
        var far = g.far[v];
        var steps = g.radial ? Math.max(2, Math.ceil((index.maxY[v] - index.minY[v]) / 2)) : 1;
        tri.x.push(g.X[v]);
        tri.y.push(g.Y[v]);
        for (var s = 0; s <= steps; s++) {
          var pt = g.at(far, index.minY[v] + ((index.maxY[v] - index.minY[v]) * s) / steps);
          tri.x.push(pt[0]);
          tri.y.push(pt[1]);
        }
        tri.x.push(g.X[v], null);
        tri.y.push(g.Y[v], null);
        var mid = g.at(far, (index.minY[v] + index.maxY[v]) / 2);
        mark.x.push(mid[0]);
        mark.y.push(mid[1]);
        var many = localNumber(index.count[v], 0, 0);
        mark.text.push(escapeText(say(words.objects, { n: many })));
        mark.hover.push("<b>" + escapeText(tipName(nodes[v], words)) + "</b><br>" +
          escapeText(say(words.collapsedHover, { n: many,
            support: formatSupport(nodes[v].support) })));
        mark.href.push(nodes[v].withheld ? null : siteHref(nodes[v].href));
      });
      traces.push({
        type: "scatter", mode: "lines", x: tri.x, y: tri.y, fill: "toself",
        fillcolor: rgba("#999999", 0.35), line: { color: colours.branch, width: 1.5 },
        hoverinfo: "skip", name: escapeText(words.collapsed), meta: "collapsed",
      });
      traces.push({
        type: "scatter", mode: "markers+text", x: mark.x, y: mark.y, text: mark.text,
        textposition: "middle right", cliponaxis: false, hovertext: mark.hover,
        hoverinfo: "text", customdata: mark.href, showlegend: false, meta: "collapsed-labels",
        marker: { size: 8, symbol: "triangle-left", color: colours.branch },
        textfont: { family: font, size: 11, color: colours.fg },
      });
    }

    // Declared contacts: a dashed curve between the two nodes (or the clades folding them).
    if (state.contacts && data.contacts.length) {
      var arc = { x: [], y: [] };
      var mids = { x: [], y: [], hover: [] };
      data.contacts.forEach(function (c) {
        var a = visibleAncestor(nodes, fold, c.source);
        var b = visibleAncestor(nodes, fold, c.target);
        var ctrl;
        if (g.radial) {
          ctrl = [(g.X[a] + g.X[b]) * 0.3, (g.Y[a] + g.Y[b]) * 0.3];
        } else {
          var dir = g.age ? -1 : 1;
          var edge = g.age ? Math.min(g.X[a], g.X[b]) : Math.max(g.X[a], g.X[b]);
          ctrl = [edge + dir * span * 0.2, (g.Y[a] + g.Y[b]) / 2];
        }
        for (var s = 0; s <= 24; s++) {
          var t = s / 24;
          var w0 = (1 - t) * (1 - t);
          var w1 = 2 * t * (1 - t);
          var w2 = t * t;
          arc.x.push(w0 * g.X[a] + w1 * ctrl[0] + w2 * g.X[b]);
          arc.y.push(w0 * g.Y[a] + w1 * ctrl[1] + w2 * g.Y[b]);
        }
        arc.x.push(null);
        arc.y.push(null);
        mids.x.push(0.25 * g.X[a] + 0.5 * ctrl[0] + 0.25 * g.X[b]);
        mids.y.push(0.25 * g.Y[a] + 0.5 * ctrl[1] + 0.25 * g.Y[b]);
        mids.hover.push("<b>" + escapeText(words.contact) + "</b><br>" +
          escapeText(tipName(nodes[c.source], words)) + " \u2194 " +
          escapeText(tipName(nodes[c.target], words)) +
          (c.characters && c.characters.length ? "<br>" + escapeText(say(words.contactTraits,
            { traits: shorten(c.characters.join(", "), 120) })) : "") +
          (c.note ? "<br>" + escapeText(shorten(String(c.note), 160)) : ""));
      });
      traces.push({
        type: "scatter", mode: "lines", x: arc.x, y: arc.y, hoverinfo: "skip",
        name: escapeText(words.contact),
        line: { color: CONTACT_COLOUR, width: 2, dash: "dash" },
        meta: "contacts",
      });
      traces.push({
        type: "scatter", mode: "markers", x: mids.x, y: mids.y, hovertext: mids.hover,
        hoverinfo: "text", showlegend: false, meta: "contact-points",
        marker: { size: 9, symbol: "diamond", color: CONTACT_COLOUR },
      });
    }

    function nodeColour(v, isTip) {
      if (onPath.has(v)) return colours.accent;
      if (shade.classes) {
        var entry = shade.legend[shade.classes[v]];
        return entry ? entry.colour : colours.branch;
      }
      return isTip ? colours.link : colours.bg;
    }

    function hoverText(v) {
      var node = nodes[v];
      var lines = ["<b>" + escapeText(tipName(node, words)) + "</b>"];
      var support = formatSupport(node.support);
      if (node.kind !== "tip" && support !== null) {
        lines.push(escapeText(words.support) + ": " + support);
      }
      if (node.kind !== "tip") {
        lines.push(escapeText(say(words.objects, { n: localNumber(index.count[v], 0, 0) })));
      }
      var xt = state.lengths === "equal" ? words.steps : data.tree.x_title;
      if (xt) lines.push(escapeText(xt) + ": " + localNumber(g.depth[v], 0, 3));
      if (shade.describe) lines.push(shade.describe(v));
      return lines.join("<br>");
    }

    // Forks drawn as squares only where they can be told apart; on a large tree on screen the
    // forks of the branches are the marks, and the clades' trace is a hover and click target
    // without markers (no SVG element per point: 999 squares took about 170 ms of the first
    // draw of a 1,000-tip tree; benchmarks/bench_tree_browser.py).
    var nodeMarkers = index.tips.length <= MANY_TIPS || state.paper;
    // Likewise the tips of a large tree are drawn as discs (discPath), their trace only
    // answers hover and clicks.

    function pointTrace(indices, isTip) {
      var keep = indices.filter(function (v) {
        return !fold.hidden[v] && !fold.collapsed[v];
      });
      var markers = nodeMarkers; // tips on a large tree: discs drawn below (tipDiscs)
      var trace = {
        type: "scatter",
        // Above MANY_TIPS on screen the names and supports live in the hover box only: a
        // text element per point made a 1,000-tip redraw much slower
        // (benchmarks/bench_tree_browser.py).
        mode: !markers ? "none" : showLabels ? "markers+text" : "markers",
        hoveron: "points",
        name: escapeText(isTip ? words.tip : markers ? words.clade : words.cladeHover),
        meta: isTip ? "tips" : "nodes",
        x: keep.map(function (v) { return g.X[v]; }),
        y: keep.map(function (v) { return g.Y[v]; }),
        cliponaxis: false,
        hovertext: keep.map(hoverText),
        hoverinfo: "text",
        customdata: keep.map(function (v) {
          return nodes[v].withheld ? null : siteHref(nodes[v].href);
        }),
        // Single values where every point is alike: per-point arrays cost plotly time on
        // large trees.
        marker: {
          size: targets.size === 0 ? (isTip ? 7 : 6) : keep.map(function (v) {
            return targets.has(v) ? (isTip ? 12 : 10) : isTip ? 7 : 6;
          }),
          symbol: isTip ? "circle" : "square",
          color: onPath.size === 0 && !shade.classes ? nodeColour(-1, isTip)
            : keep.map(function (v) { return nodeColour(v, isTip); }),
          line: {
            width: 1.5,
            color: onPath.size === 0 ? (isTip ? colours.link : colours.branch)
              : keep.map(function (v) {
                  return onPath.has(v) ? colours.accent : isTip ? colours.link : colours.branch;
                }),
          },
        },
      };
      if (!showLabels) return trace; // no text is drawn: build no per-point text arrays
      trace.text = keep.map(function (v) {
        var node = nodes[v];
        if (isTip) return escapeText(shorten(tipName(node, words), maxChars));
        var s = formatSupport(node.support);
        return s !== null && node.support < 1 && v !== index.root ? s : "";
      });
      trace.textposition = keep.map(function (v) {
        if (!g.radial) return isTip ? (g.age ? "middle left" : "middle right") : "top left";
        var left = Math.cos(g.angle(nodes[v].y)) < 0;
        return isTip ? (left ? "middle left" : "middle right") : "top center";
      });
      trace.textfont = {
        family: font,
        size: isTip ? 12 : 10,
        color: isTip
          ? keep.map(function (v) {
              return targets.has(v) ? colours.accent
                : outgroup.has(nodes[v].id) ? colours.muted : colours.fg;
            })
          : colours.muted,
      };
      return trace;
    }
    traces.push(pointTrace(index.inner, false));
    traces.push(pointTrace(index.tips, true));

    var longest = showLabels ? index.tips.reduce(function (m, v) {
      return Math.max(m, Math.min(maxChars, tipName(nodes[v], words).length));
    }, 0) : 4;
    var labelPx = Math.round(longest * LABEL_CHAR_PX) + 24;
    var layout = {
      font: { family: font, color: colours.fg, size: 13 },
      paper_bgcolor: "rgba(0,0,0,0)",
      plot_bgcolor: "rgba(0,0,0,0)",
      hovermode: "closest",
      hoverlabel: {
        bgcolor: colours.surface,
        bordercolor: colours.border,
        font: { family: font, color: colours.fg, size: 13 },
      },
      dragmode: "pan",
      modebar: { bgcolor: "rgba(0,0,0,0)", color: colours.muted, activecolor: colours.fg },
      showlegend: true,
      legend: {
        // above the plot, clear of the axis title below it
        orientation: "h", x: 0, xanchor: "left", y: 1.01, yanchor: "bottom",
        title: { text: escapeText(shade.title || words.key), side: "top left" },
        font: { family: font, size: 12, color: colours.fg },
        itemclick: false, itemdoubleclick: false,
      },
      uirevision: state.layout + state.lengths,
      shapes: shapes,
      separators: data.separators,
    };
    if (g.radial) {
      var reach = span * 1.04;
      layout.margin = { l: 24, r: 24, t: 16, b: 16 };
      layout.xaxis = { range: [-reach, reach], visible: false, fixedrange: false };
      layout.yaxis = { range: [-reach, reach], visible: false, scaleanchor: "x",
        fixedrange: false };
    } else {
      var xTitle = state.lengths === "equal" ? words.steps : data.tree.x_title || "";
      var xRange = g.age ? [g.maxDepth + span * 0.03, -span * 0.01]
        : [-span * 0.03, g.maxDepth + span * (state.contacts && data.contacts.length ? 0.12 : 0.01)];
      layout.margin = { l: g.age ? labelPx : 16, r: g.age ? 16 : labelPx, t: 16, b: 56 };
      layout.xaxis = {
        title: { text: escapeText(xTitle), standoff: 8 },
        range: xRange, zeroline: false, showgrid: true, gridcolor: colours.border,
        linecolor: colours.border, tickcolor: colours.border, ticks: "outside", fixedrange: false,
      };
      // the first tip at the top, so the plot reads in the same order as the text list
      layout.yaxis = { range: [index.tips.length - 0.2, -0.8], visible: false, fixedrange: false };
    }
    var discs = [];
    if (!nodeMarkers) {
      scale = scale || layoutScale(layout, width, height);
      tipDiscs(traces, discs, scale);
    }
    return { data: traces, layout: layout, tips: index.tips.length, discs: discs, scale: scale };

    // The tips of a large tree: a disc per tip in the link colour (a ring when shaded), discs
    // in the shading's colours inside it, and the found objects and clades as markers.
    // `discs` records each disc shape (index, centres, radius in px) to redraw at a new zoom.
    function tipDiscs(traces, discs, scale) {
      var tipsTrace = traces[traces.length - 1];
      tipsTrace.showlegend = false;
      function add(colour, list, rpx, hole) {
        var xs = list.map(function (v) { return g.X[v]; });
        var ys = list.map(function (v) { return g.Y[v]; });
        discs.push({ shape: shapes.length, x: xs, y: ys, r: rpx, hole: hole, q: g.q });
        shapes.push({ type: "path", layer: "between", xref: "x", yref: "y", fillrule: "nonzero",
          fillcolor: colour, line: { width: 0 },
          path: discPath(xs, ys, rpx / scale.x, rpx / scale.y, hole, g.q) });
      }
      var shown = index.tips.filter(function (v) { return !fold.hidden[v] && !targets.has(v); });
      // The key shows the marker the discs stand for (a trace without points draws nothing).
      traces.push({ type: "scatter", mode: "markers", x: [null], y: [null], hoverinfo: "skip",
        name: escapeText(words.tip), meta: "tips-key",
        marker: { size: 7, symbol: "circle", color: colours.link,
          line: { width: 1.5, color: colours.link } } });
      // As a marker of size 7 with a 1.5 px outline: radius 4.25 px, the fill 2.75 px.
      add(colours.link, shown, 4.25, shade.classes ? 2.75 / 4.25 : 0);
      if (shade.classes) {
        var byColour = new Map();
        shown.forEach(function (v) {
          var colour = nodeColour(v, true);
          if (!byColour.has(colour)) byColour.set(colour, []);
          byColour.get(colour).push(v);
        });
        byColour.forEach(function (list, colour) {
          add(colour, list, 2.75, 0);
        });
      }
      var found = Array.from(targets).filter(function (v) {
        return !fold.hidden[v] && !fold.collapsed[v];
      });
      if (found.length) {
        traces.push({
          type: "scatter", mode: "markers", meta: "found", showlegend: false, hoverinfo: "skip",
          x: found.map(function (v) { return g.X[v]; }),
          y: found.map(function (v) { return g.Y[v]; }),
          marker: {
            size: found.map(function (v) { return nodes[v].kind === "tip" ? 12 : 10; }),
            symbol: found.map(function (v) { return nodes[v].kind === "tip" ? "circle" : "square"; }),
            color: colours.accent, line: { width: 1.5, color: colours.accent },
          },
        });
      }
    }
  }

  function visibleAncestor(nodes, fold, v) {
    while (v >= 0 && fold.hidden[v]) v = nodes[v].parent;
    return v;
  }

  var CONFIG = {
    responsive: true,
    displaylogo: false,
    // plotly.js 4 offers to upload the chart to a remote service by default: keep everything
    // on the site (no share button, no server URL) and keep plotly's own logging quiet.
    showSendToCloud: false,
    plotlyServerURL: "",
    logging: 0,
    scrollZoom: false,
    showTips: false,
    displayNotifier: false,
    modeBarButtonsToRemove: [
      "sendChartToCloud",
      "select2d",
      "lasso2d",
      "autoScale2d",
      "toggleSpikelines",
      "hoverClosestCartesian",
      "hoverCompareCartesian",
    ],
    toImageButtonOptions: { format: "svg", filename: "lineage-tree" },
  };

  // CONFIG with plotly's tool bar titles in the page's language (plotly's own locale lookup:
  // config.locale names an entry of config.locales whose dictionary maps its English titles).
  function plotConfig(words) {
    var dictionary = {};
    PLOTLY_KEYS.forEach(function (key) {
      if (words[key] !== WORDS[key]) dictionary[WORDS[key]] = words[key];
    });
    var config = Object.assign({}, CONFIG);
    if (Object.keys(dictionary).length) {
      config.locale = PAGE_LANG;
      config.locales = {};
      config.locales[PAGE_LANG] = { dictionary: dictionary };
    }
    return config;
  }

  // The plot box is a labelled group (role="group": an image role may not hold plotly's tool
  // bar buttons); the page's own form controls do everything the plot can, so plotly's tool
  // bar stays out of the tab order.
  function keepOutOfTabOrder(div) {
    var controls = div.querySelectorAll("button, a[href], [tabindex]");
    for (var i = 0; i < controls.length; i++) controls[i].setAttribute("tabindex", "-1");
  }

  function markUnavailable(div) {
    div.classList.add("plot-unavailable");
  }

  // ---- The page's controls ----------------------------------------------------------------

  function byId(id) {
    return document.getElementById(id);
  }

  function fillStateSelect(select, data, state) {
    if (!select) return;
    while (select.firstChild) select.removeChild(select.firstChild);
    var c = data.states && state.shade && state.shade !== "changes"
      ? characterById(data.states, state.shade) : null;
    function add(value, text) {
      var o = document.createElement("option");
      o.value = value;
      o.textContent = text;
      select.appendChild(o);
    }
    var words = data.words;
    if (!c) {
      add("most", state.shade === "changes" ? words.allTraits : words.chooseTrait);
      select.disabled = true;
      state.mode = "most";
      return;
    }
    add("most", words.mostOption);
    for (var s = 0; s < c.k; s++) {
      add("p" + s, say(words.probOption, { state: stateWords(c, s, words) }));
    }
    add("changes", words.changesOption);
    select.disabled = false;
    select.value = state.mode;
    if (select.value !== state.mode) {
      select.value = "most";
      state.mode = "most";
    }
  }

  // Tips whose names contain every word of the query (case-insensitive); withheld never match.
  function findTips(data, query) {
    var wordsOf = String(query).toLowerCase().split(/\s+/).filter(Boolean);
    if (!wordsOf.length) return [];
    return data.index.tips.filter(function (v) {
      var n = data.nodes[v];
      if (n.withheld) return false;
      var hay = (String(n.label || "") + " " + String(n.id || "")).toLowerCase();
      return wordsOf.every(function (w) { return hay.indexOf(w) >= 0; });
    });
  }

  function wireControls(data, state, redraw) {
    var form = byId("tree-controls");
    if (!form) return;
    var layout = byId("tree-layout");
    var lengths = byId("tree-lengths");
    var collapse = byId("tree-collapse");
    var collapseValue = byId("tree-collapse-value");
    var shade = byId("tree-shade");
    var mode = byId("tree-state");
    var find = byId("tree-find");
    var status = byId("tree-find-status");
    var contacts = byId("tree-contacts");
    var names = byId("tree-find-names");

    if (!data.states && shade) {
      shade.disabled = true;
      if (mode) mode.disabled = true;
    }
    if (contacts && !data.contacts.length) {
      var row = contacts.closest(".tree-control");
      if (row) row.hidden = true;
    }
    if (names) {
      var seen = new Set();
      data.index.tips.forEach(function (v) {
        var n = data.nodes[v];
        if (n.withheld || !n.label || seen.has(n.label)) return;
        seen.add(n.label);
        var o = document.createElement("option");
        o.value = n.label;
        names.appendChild(o);
      });
    }
    fillStateSelect(mode, data, state);

    function on(el, type, fn) {
      if (el) el.addEventListener(type, fn);
    }
    on(layout, "change", function () {
      state.layout = layout.value === "radial" ? "radial" : "rect";
      redraw();
    });
    on(lengths, "change", function () {
      state.lengths = lengths.value === "equal" ? "equal" : "given";
      redraw();
    });
    on(collapse, "input", function () {
      state.collapse = Number(collapse.value) || 0;
      if (collapseValue) {
        collapseValue.textContent = state.collapse > 0 ? localNumber(state.collapse, 2, 2)
          : data.words.noCollapse;
      }
      redraw();
    });
    on(shade, "change", function () {
      state.shade = shade.value;
      fillStateSelect(mode, data, state);
      redraw();
    });
    on(mode, "change", function () {
      state.mode = mode.value;
      redraw();
    });
    on(contacts, "change", function () {
      state.contacts = contacts.checked;
      redraw();
    });
    on(form, "submit", function (event) {
      event.preventDefault();
      var query = find ? find.value.trim() : "";
      state.found = findTips(data, query);
      if (status) {
        var n = state.found.length;
        var words = data.words;
        status.textContent = !query ? words.findPrompt
          : n === 0 ? say(words.findNone, { query: query })
          : n === 1 ? say(words.findOne, { name: tipName(data.nodes[state.found[0]], words) })
          : say(words.findMany, { n: localNumber(n, 0, 0), query: query });
      }
      redraw();
    });
    on(form, "reset", function () {
      // after the browser has put the controls back to their initial values
      setTimeout(function () {
        state.layout = "rect";
        state.lengths = "given";
        state.collapse = 0;
        state.shade = "";
        state.mode = "most";
        state.found = [];
        state.contacts = contacts ? contacts.checked : true;
        if (collapseValue) collapseValue.textContent = data.words.noCollapse;
        if (status) status.textContent = "";
        fillStateSelect(mode, data, state);
        redraw();
      }, 0);
    });
    form.hidden = false;
  }

  // ---- Start -------------------------------------------------------------------------------

  function draw() {
    var div = document.getElementById("lineage-tree");
    if (!div) return;
    var Plotly = window.Plotly;
    var atlasData = window.AtlasData || {};
    var nodes = validNodes(atlasData.tree);
    if (!Plotly || typeof Plotly.newPlot !== "function" || !nodes) {
      markUnavailable(div);
      return;
    }
    var data = {
      tree: atlasData.tree,
      nodes: nodes,
      index: indexTree(nodes),
      states: validStates(atlasData.states, nodes.length),
      contacts: validContacts(atlasData.contacts, nodes.length),
      words: interfaceWords(div),
      separators: separators(),
    };
    var highlight = (div.dataset.highlight || "").split(/\s+/).filter(Boolean);
    var state = {
      layout: "rect",
      lengths: "given",
      collapse: 0,
      shade: div.dataset.character && data.states ? div.dataset.character : "",
      mode: "most",
      found: data.index.tips.concat(data.index.inner).filter(function (v) {
        return nodes[v].id && highlight.indexOf(nodes[v].id) >= 0;
      }),
      contacts: !div.dataset.character,
      paper: false,
    };

    var config = plotConfig(data.words);
    var baseHeight = null;
    var shown = null; // the figure on screen
    // mode: "first" (newPlot), "screen" (redraw after a change) or "paper" (fixed size, black
    // on white, for printing).
    function render(mode) {
      var paper = mode === "paper";
      state.paper = paper;
      var width = paper ? PAPER_WIDTH_PX : div.clientWidth;
      var tips = data.index.tips.length;
      var height;
      if (paper) {
        height = Math.min(PAPER_MAX_HEIGHT_PX, Math.max(360, tips * 16 + 72));
      } else {
        // Room for every label; without labels (many tips) a denser tree that zooming opens
        // up: an 18,000 px tall plot made every redraw of 1,000 tips several times slower
        // (benchmarks/bench_tree_browser.py). Never below the stylesheet's height; plotly is
        // told the height, the width follows the box.
        var needed = state.layout === "radial" ? Math.min(width, 1000)
          : tips <= MANY_TIPS ? tips * TIP_ROW_PX + 160 : Math.min(tips * 3 + 160, 2400);
        if (baseHeight === null) baseHeight = div.clientHeight;
        height = Math.max(baseHeight, needed);
      }
      // A redraw that keeps the reader's zoom (same uirevision) keeps its scale.
      var keep = mode === "screen" && shown && shown.layout.uirevision ===
        state.layout + state.lengths && shown.layout.height === height ? drawnScale(div) : null;
      var fig = buildFigure(div, data, state, paper ? PAPER : screenColours(), width, height,
        keep);
      // plotly.js 4.1 leaves drawn "between" shapes beyond the new count on the page when a
      // redraw has fewer of them: keep the count up with empty paths.
      var shapes = fig.layout.shapes;
      while (shown && shapes.length < shown.layout.shapes.length) {
        shapes.push({ type: "path", layer: "between", xref: "x", yref: "y", path: "M0,0",
          line: { width: 0 } });
      }
      fig.layout.height = height;
      if (paper) fig.layout.width = PAPER_WIDTH_PX;
      else div.style.height = height + "px";
      div.dataset.shade = state.shade ? state.shade + ":" + state.mode : "";
      div.dataset.layout = state.layout;
      shown = fig;
      return (mode === "first" ? Plotly.newPlot : Plotly.react)(div, fig.data, fig.layout,
        config);
    }

    // After a zoom (or anything else that changed the plot's scale) the tip discs are redrawn
    // at their size in pixels; one frame later, so plotly has finished drawing.
    var rescaling = null;
    function rescaleDiscs() {
      if (rescaling || !shown || !shown.discs.length) return;
      rescaling = window.requestAnimationFrame(function () {
        rescaling = null;
        var now = drawnScale(div);
        var was = shown.scale;
        if (!now || (Math.abs(now.x / was.x - 1) < 0.1 && Math.abs(now.y / was.y - 1) < 0.1)) {
          return;
        }
        shown.scale = now;
        var update = {};
        shown.discs.forEach(function (d) {
          update["shapes[" + d.shape + "].path"] = discPath(d.x, d.y, d.r / now.x, d.r / now.y,
            d.hole, d.q);
        });
        Plotly.relayout(div, update);
      });
    }

    var drawing;
    try {
      drawing = render("first");
    } catch (err) {
      markUnavailable(div);
      return;
    }
    Promise.resolve(drawing).then(
      function () {
        var figure = div.closest("figure");
        if (figure) figure.classList.add("has-plot");
        keepOutOfTabOrder(div);
        div.on("plotly_afterplot", function () {
          keepOutOfTabOrder(div);
          rescaleDiscs();
        });
        rescaleDiscs();
        div.on("plotly_click", function (event) {
          var point = event && event.points && event.points[0];
          var href = point && point.customdata;
          if (typeof href === "string" && href) window.location.href = href;
        });
        div.on("plotly_hover", function (event) {
          var point = event && event.points && event.points[0];
          div.classList.toggle("is-pointing", Boolean(point && point.customdata));
        });
        div.on("plotly_unhover", function () {
          div.classList.remove("is-pointing");
        });
        var pendingRedraw = null;
        function redraw() {
          // one redraw for a burst of changes (dragging the support slider)
          if (pendingRedraw) return;
          pendingRedraw = window.requestAnimationFrame(function () {
            pendingRedraw = null;
            render("screen");
          });
        }
        wireControls(data, state, redraw);
        var pending = null;
        window.addEventListener("resize", function () {
          clearTimeout(pending);
          pending = setTimeout(function () {
            render("screen");
          }, 250);
        });
        var scheme = window.matchMedia && window.matchMedia("(prefers-color-scheme: dark)");
        if (scheme && scheme.addEventListener) {
          scheme.addEventListener("change", function () {
            render("screen");
          });
        }
        window.addEventListener("beforeprint", function () {
          render("paper");
        });
        window.addEventListener("afterprint", function () {
          Promise.resolve(render("screen")).then(function () {
            if (Plotly.Plots && Plotly.Plots.resize) return Plotly.Plots.resize(div);
          });
        });
      },
      function () {
        markUnavailable(div);
      }
    );
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", draw);
  } else {
    draw();
  }
})();
