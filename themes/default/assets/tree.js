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
  var MANY_TIPS = 300; // above this, tip labels are left to the hover box on screen

  // Okabe & Ito (2008): orange, sky blue, bluish green, yellow, blue, vermillion, reddish
  // purple, then grey for anything beyond seven states.
  var STATE_COLOURS = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00",
    "#CC79A7", "#999999"];
  // Tol (2021) YlOrBr, the six darker steps (the palest are invisible on a white page).
  var GRADED = ["#FEC44F", "#FB9A29", "#EC7014", "#CC4C02", "#993404", "#662506"];
  var CONTACT_COLOUR = "#CC79A7";
  var CERTAINTY = [
    { below: 0.5, alpha: 0.3, words: "below 0.5" },
    { below: 0.7, alpha: 0.5, words: "0.5 to 0.7" },
    { below: 0.9, alpha: 0.75, words: "0.7 to 0.9" },
    { below: Infinity, alpha: 1, words: "0.9 or more" },
  ];
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
    return typeof value === "number" && isFinite(value) ? value.toFixed(2) : null;
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
    return {
      support: div.dataset.textSupport || "Support",
      withheld: div.dataset.textWithheld || "Withheld",
    };
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
    return { n: n, root: root, tips: tips, inner: inner, equalX: equalX, minY: minY, maxY: maxY,
      count: count, height: height };
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
        legend.push({ colour: colour, name: b === GRADED.length - 1
          ? lower[b] + " or more changes" : lower[b] + " to " + CHANGE_BINS[b] + " changes" });
      });
      describe = function (v) {
        return "Expected changes on the branch" + (ch ? " (" + escapeText(ch.label) + ")" : "") +
          ": " + values[v].toFixed(2);
      };
      return { classes: cls, legend: legend, describe: describe,
        title: ch ? "Changes per branch: " + ch.label : "Changes per branch, all traits" };
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
        legend.push({ colour: colour, name: b === GRADED.length - 1
          ? "probability " + lo[b] + " or more" : "probability " + lo[b] + " to " + PROB_BINS[b] });
      });
      describe = function (u) {
        return "Probability of " + escapeText(stateWords(c, s)) + ": " + values[u].toFixed(3);
      };
      return { classes: cls, legend: legend, describe: describe,
        title: c.label + ": probability of " + stateWords(c, s) };
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
        legend.push({ colour: rgba(stateColour(t), CERTAINTY[q].alpha),
          name: stateWords(c, t) + ", probability " + CERTAINTY[q].words,
          group: "state-" + t });
      }
    }
    describe = function (w) {
      return "Most probable: " + escapeText(stateWords(c, best[w])) + " (" +
        values[w].toFixed(3) + ")";
    };
    return { classes: cls, legend: legend, describe: describe,
      title: c.label + ": most probable state (paler: less certain)" };
  }

  function stateColour(t) {
    return STATE_COLOURS[Math.min(t, STATE_COLOURS.length - 1)];
  }

  function stateWords(c, s) {
    var desc = c.descriptions && c.descriptions[s];
    return "state " + c.symbols[s] + (desc && desc !== c.symbols[s] ? " (" + desc + ")" : "");
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
    // A branch: parent p to child c (elbow, or arc at the parent's radius then a ray).
    function branch(p, c, xs, ys) {
      if (!radial) {
        xs.push(X[p], X[p], X[c], null);
        ys.push(Y[p], Y[c], Y[c], null);
        return;
      }
      var a0 = angle(nodes[p].y);
      var a1 = angle(nodes[c].y);
      var steps = Math.max(1, Math.ceil(Math.abs(a1 - a0) / 0.06));
      for (var s = 0; s <= steps; s++) {
        var a = a0 + ((a1 - a0) * s) / steps;
        xs.push(depth[p] * Math.cos(a));
        ys.push(depth[p] * Math.sin(a));
      }
      xs.push(X[c], null);
      ys.push(Y[c], null);
    }
    return { X: X, Y: Y, depth: depth, far: far, maxDepth: maxDepth, radial: radial, age: age,
      branch: branch, at: at, angle: angle, nTips: nTips };
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

  function buildFigure(div, data, state, colours, width) {
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

    // Branches: one line trace per colour class (plotly colours a line trace as a whole).
    var byClass = new Map();
    for (var i = 0; i < nodes.length; i++) {
      var p = nodes[i].parent;
      if (p < 0 || fold.hidden[i]) continue;
      var key = shade.classes ? shade.classes[i] : -1;
      if (!byClass.has(key)) byClass.set(key, { x: [], y: [] });
      var bucket = byClass.get(key);
      g.branch(p, i, bucket.x, bucket.y);
    }
    var shownLegend = new Set();
    Array.from(byClass.keys()).sort(function (a, b) { return a - b; }).forEach(function (key) {
      var b = byClass.get(key);
      var entry = key >= 0 ? shade.legend[key] : null;
      var group = entry ? entry.group || "class-" + key : "branches";
      traces.push({
        type: "scatter", mode: "lines", x: b.x, y: b.y, hoverinfo: "skip",
        name: entry ? escapeText(entry.name) : "Branch", // plotly reads names as markup
        legendgroup: group,
        showlegend: !shownLegend.has(entry ? entry.name : "Branch"),
        line: { color: entry ? entry.colour : colours.branch, width: entry ? 2.5 : 1.5 },
        meta: "branches",
      });
      shownLegend.add(entry ? entry.name : "Branch");
    });

    // The path to each object found by the search box.
    if (onPath.size > 0) {
      var path = { x: [], y: [] };
      onPath.forEach(function (v) {
        var q = nodes[v].parent;
        if (q >= 0 && !fold.hidden[v]) g.branch(q, v, path.x, path.y);
      });
      traces.push({
        type: "scatter", mode: "lines", x: path.x, y: path.y, hoverinfo: "skip",
        name: "Path to the object found", line: { color: colours.accent, width: 4 },
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
        mark.text.push(index.count[v] + " objects");
        mark.hover.push("<b>" + escapeText(tipName(nodes[v], words)) + "</b><br>" +
          index.count[v] + " objects, collapsed (support " + formatSupport(nodes[v].support) +
          ")");
        mark.href.push(nodes[v].withheld ? null : siteHref(nodes[v].href));
      });
      traces.push({
        type: "scatter", mode: "lines", x: tri.x, y: tri.y, fill: "toself",
        fillcolor: rgba("#999999", 0.35), line: { color: colours.branch, width: 1.5 },
        hoverinfo: "skip", name: "Collapsed clade (number of objects)", meta: "collapsed",
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
        mids.hover.push("<b>Declared contact</b><br>" + escapeText(tipName(nodes[c.source],
          words)) + " \u2194 " + escapeText(tipName(nodes[c.target], words)) +
          (c.characters && c.characters.length ? "<br>Traits: " +
            escapeText(shorten(c.characters.join(", "), 120)) : "") +
          (c.note ? "<br>" + escapeText(shorten(String(c.note), 160)) : ""));
      });
      traces.push({
        type: "scatter", mode: "lines", x: arc.x, y: arc.y, hoverinfo: "skip",
        name: "Declared contact", line: { color: CONTACT_COLOUR, width: 2, dash: "dash" },
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
      if (node.kind !== "tip") lines.push(index.count[v] + " objects");
      var xt = state.lengths === "equal" ? "Steps from the root" : data.tree.x_title;
      if (xt) lines.push(escapeText(xt) + ": " + Number(g.depth[v].toFixed(3)));
      if (shade.describe) lines.push(shade.describe(v));
      return lines.join("<br>");
    }

    function pointTrace(indices, isTip) {
      var keep = indices.filter(function (v) {
        return !fold.hidden[v] && !fold.collapsed[v];
      });
      return {
        type: "scatter",
        // Above MANY_TIPS on screen the names and supports live in the hover box only: a
        // text element per point made a 1,000-tip redraw much slower
        // (benchmarks/bench_tree_browser.py).
        mode: showLabels ? "markers+text" : "markers",
        name: isTip ? "Object (opens its page)" : "Clade (number: support; opens its trait sheet)",
        meta: isTip ? "tips" : "nodes",
        x: keep.map(function (v) { return g.X[v]; }),
        y: keep.map(function (v) { return g.Y[v]; }),
        text: keep.map(function (v) {
          var node = nodes[v];
          if (isTip) {
            return showLabels || targets.has(v)
              ? escapeText(shorten(tipName(node, words), maxChars)) : "";
          }
          var s = formatSupport(node.support);
          return s !== null && node.support < 1 && v !== index.root ? s : "";
        }),
        textposition: keep.map(function (v) {
          if (!g.radial) return isTip ? (g.age ? "middle left" : "middle right") : "top left";
          var left = Math.cos(g.angle(nodes[v].y)) < 0;
          return isTip ? (left ? "middle left" : "middle right") : "top center";
        }),
        textfont: {
          family: font,
          size: isTip ? 12 : 10,
          color: isTip
            ? keep.map(function (v) {
                return targets.has(v) ? colours.accent
                  : outgroup.has(nodes[v].id) ? colours.muted : colours.fg;
              })
            : colours.muted,
        },
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
        title: { text: escapeText(shade.title || "Key"), side: "top left" },
        font: { family: font, size: 12, color: colours.fg },
        itemclick: false, itemdoubleclick: false,
      },
      uirevision: state.layout + state.lengths,
    };
    if (g.radial) {
      var reach = span * 1.04;
      layout.margin = { l: 24, r: 24, t: 16, b: 16 };
      layout.xaxis = { range: [-reach, reach], visible: false, fixedrange: false };
      layout.yaxis = { range: [-reach, reach], visible: false, scaleanchor: "x",
        fixedrange: false };
    } else {
      var xTitle = state.lengths === "equal" ? "Steps from the root" : data.tree.x_title || "";
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
    return { data: traces, layout: layout, tips: index.tips.length };
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
    if (!c) {
      add("most", state.shade === "changes" ? "All traits together" : "Choose a trait first");
      select.disabled = true;
      state.mode = "most";
      return;
    }
    add("most", "Most probable state");
    for (var s = 0; s < c.k; s++) add("p" + s, "Probability of " + stateWords(c, s));
    add("changes", "Changes per branch (this trait)");
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
        collapseValue.textContent = state.collapse > 0 ? state.collapse.toFixed(2) : "none";
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
        status.textContent = !query ? "Type part of an object's name to find it."
          : n === 0 ? "No object matches \u201c" + query + "\u201d."
          : n === 1 ? "Found " + tipName(data.nodes[state.found[0]], data.words) +
            "; its path to the root is highlighted."
          : "Found " + n + " objects matching \u201c" + query +
            "\u201d; their paths to the root are highlighted.";
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
        if (collapseValue) collapseValue.textContent = "none";
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

    var baseHeight = null;
    // mode: "first" (newPlot), "screen" (redraw after a change) or "paper" (fixed size, black
    // on white, for printing).
    function render(mode) {
      var paper = mode === "paper";
      state.paper = paper;
      var width = paper ? PAPER_WIDTH_PX : div.clientWidth;
      var fig = buildFigure(div, data, state, paper ? PAPER : screenColours(), width);
      if (paper) {
        fig.layout.width = PAPER_WIDTH_PX;
        fig.layout.height = Math.min(PAPER_MAX_HEIGHT_PX, Math.max(360, fig.tips * 16 + 72));
      }
      // Room for every label; without labels (many tips) a denser tree that zooming opens
      // up: an 18,000 px tall plot made every redraw of 1,000 tips several times slower
      // (benchmarks/bench_tree_browser.py).
      var needed = state.layout === "radial" ? Math.min(div.clientWidth, 1000)
        : fig.tips <= MANY_TIPS ? fig.tips * TIP_ROW_PX + 160 : Math.min(fig.tips * 3 + 160, 2400);
      if (!paper) {
        // never below the stylesheet's height; plotly is told the height, the width follows
        // the box
        if (baseHeight === null) baseHeight = div.clientHeight;
        var height = Math.max(baseHeight, needed);
        div.style.height = height + "px";
        fig.layout.height = height;
      }
      div.dataset.shade = state.shade ? state.shade + ":" + state.mode : "";
      div.dataset.layout = state.layout;
      return (mode === "first" ? Plotly.newPlot : Plotly.react)(div, fig.data, fig.layout, CONFIG);
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
        });
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
