/* Lineage tree: draws window.AtlasData.tree into #lineage-tree with plotly.
 *
 * Data (written by the site builder into data/tree.js):
 *   {nodes: [{id, kind: "tip" | "node", x, y, parent, label, href, support, withheld}],
 *    x_title, outgroup: [ids], x_axis (optional): "age" | "depth"}
 * Nodes come in postorder, `parent` is an index into `nodes` (-1 for the root), `x` is the depth
 * from the root and `y` the vertical slot (tips 0..n-1). When the axis counts time back from the
 * youngest object (x_axis "age", or an x_title that says "before"), the plot shows
 * max(x) - x on a reversed axis, so the root stays on the left and the labels read as ages.
 *
 * The tree is drawn as a rectangular cladogram/phylogram: each branch is an elbow from the
 * parent's position down (or up) to the child's row and across to the child. Three traces carry
 * everything: all branches as one line trace with null separators, internal nodes as markers
 * (support as small labels when below 1), and tips as markers with their names.
 * Ids listed in the plot's data-highlight attribute are drawn with their path to the root.
 *
 * Interface words can be translated by the template through data attributes on the plot div:
 * data-text-support ("Support") and data-text-withheld ("Withheld").
 *
 * No globals are created. If plotly or the data is missing, nothing is drawn, the empty box is
 * hidden (class plot-unavailable) and the page's text equivalent stays as it is.
 */
(function () {
  "use strict";

  var TIP_ROW_PX = 18; // vertical room per tip before the plot grows past its CSS height
  var LABEL_CHAR_PX = 7.2; // rough width of one label character at 12 px, for the right margin
  var PAPER_WIDTH_PX = 660; // printed width: A4 or US Letter less margins, at 96 px per inch
  var PAPER_MAX_HEIGHT_PX = 900; // one printed page

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
      if (!Number.isInteger(p) || p < -1 || p >= nodes.length || p === i) return null;
    }
    return nodes;
  }

  // Indices of the highlighted nodes and of every node on their paths to the root.
  function highlightPath(nodes, ids) {
    var byId = {};
    nodes.forEach(function (n, i) {
      byId[n.id] = i;
    });
    var marked = new Set();
    var targets = new Set();
    ids.forEach(function (id) {
      var i = byId[id];
      if (i === undefined) return;
      targets.add(i);
      var guard = 0;
      while (i >= 0 && !marked.has(i) && guard++ <= nodes.length) {
        marked.add(i);
        i = nodes[i].parent;
      }
    });
    return { onPath: marked, targets: targets };
  }

  // One elbow per branch: parent (x, y) -> parent (x, child y) -> child (x, y), then a gap.
  function branchLines(nodes, px, keep) {
    var xs = [];
    var ys = [];
    nodes.forEach(function (n, i) {
      if (n.parent < 0 || (keep && !keep(i))) return;
      var p = nodes[n.parent];
      xs.push(px(p.x), px(p.x), px(n.x), null);
      ys.push(p.y, n.y, n.y, null);
    });
    return { x: xs, y: ys };
  }

  function hoverText(n, xTitle, px, words) {
    var lines = ["<b>" + escapeText(tipName(n, words)) + "</b>"];
    var support = formatSupport(n.support);
    if (n.kind !== "tip" && support !== null) {
      lines.push(escapeText(words.support) + ": " + support);
    }
    if (xTitle) lines.push(escapeText(xTitle) + ": " + Number(px(n.x).toFixed(3)));
    return lines.join("<br>");
  }

  // The display name; a withheld object never shows its id, only the label the builder gave.
  function tipName(n, words) {
    return String(n.withheld ? n.label || words.withheld : n.label || n.id);
  }

  function interfaceWords(div) {
    return {
      support: div.dataset.textSupport || "Support",
      withheld: div.dataset.textWithheld || "Withheld",
    };
  }

  // Shorten a label to at most `max` characters, ending in an ellipsis; the hover box keeps the
  // full name.
  function shorten(text, max) {
    return text.length <= max ? text : text.slice(0, Math.max(1, max - 1)).trimEnd() + "\u2026";
  }

  // Colours for the screen come from the stylesheet (so the dark scheme works); on paper the
  // tree is black on white whatever the screen scheme.
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

  function buildFigure(div, tree, nodes, colours, width) {
    var font = getComputedStyle(document.body).fontFamily || "sans-serif";
    var words = interfaceWords(div);
    var ageAxis = isAgeAxis(tree);
    var maxX = nodes.reduce(function (m, n) {
      return Math.max(m, n.x);
    }, 0);
    var px = ageAxis
      ? function (x) {
          return maxX - x;
        }
      : function (x) {
          return x;
        };
    var ids = (div.dataset.highlight || "").split(/\s+/).filter(Boolean);
    var hl = highlightPath(nodes, ids);
    var outgroup = new Set(Array.isArray(tree.outgroup) ? tree.outgroup : []);

    // Labels may take up to 45% of the box width; longer ones are shortened on small screens.
    var maxChars = Math.max(8, Math.floor((width * 0.45 - 24) / LABEL_CHAR_PX));

    var tips = [];
    var inner = [];
    nodes.forEach(function (n, i) {
      (n.kind === "tip" ? tips : inner).push(i);
    });

    var all = branchLines(nodes, px, null);
    var data = [
      {
        type: "scatter",
        mode: "lines",
        x: all.x,
        y: all.y,
        line: { color: colours.branch, width: 1.5, shape: "linear" },
        hoverinfo: "skip",
        showlegend: false,
      },
    ];
    if (hl.onPath.size > 0) {
      var path = branchLines(nodes, px, function (i) {
        return hl.onPath.has(i);
      });
      data.push({
        type: "scatter",
        mode: "lines",
        x: path.x,
        y: path.y,
        line: { color: colours.accent, width: 3.5 },
        hoverinfo: "skip",
        showlegend: false,
      });
    }

    function pointTrace(indices, isTip) {
      return {
        type: "scatter",
        mode: "markers+text",
        x: indices.map(function (i) {
          return px(nodes[i].x);
        }),
        y: indices.map(function (i) {
          return nodes[i].y;
        }),
        text: indices.map(function (i) {
          var n = nodes[i];
          if (isTip) return escapeText(shorten(tipName(n, words), maxChars));
          var s = formatSupport(n.support);
          return s !== null && n.support < 1 ? s : "";
        }),
        textposition: isTip ? "middle right" : "top left",
        textfont: {
          family: font,
          size: isTip ? 12 : 10,
          color: isTip
            ? indices.map(function (i) {
                return hl.targets.has(i)
                  ? colours.accent
                  : outgroup.has(nodes[i].id)
                    ? colours.muted
                    : colours.fg;
              })
            : colours.muted,
        },
        cliponaxis: false,
        hovertext: indices.map(function (i) {
          return hoverText(nodes[i], tree.x_title, px, words);
        }),
        hoverinfo: "text",
        customdata: indices.map(function (i) {
          var n = nodes[i];
          return n.withheld ? null : siteHref(n.href);
        }),
        marker: {
          size: indices.map(function (i) {
            return hl.targets.has(i) ? (isTip ? 11 : 10) : isTip ? 7 : 6;
          }),
          symbol: isTip ? "circle" : "square",
          color: indices.map(function (i) {
            if (hl.onPath.has(i)) return colours.accent;
            return isTip ? colours.link : colours.bg;
          }),
          line: {
            width: 1.5,
            color: indices.map(function (i) {
              return hl.onPath.has(i) ? colours.accent : isTip ? colours.link : colours.branch;
            }),
          },
        },
        showlegend: false,
      };
    }
    data.push(pointTrace(inner, false));
    data.push(pointTrace(tips, true));

    var longest = tips.reduce(function (m, i) {
      return Math.max(m, Math.min(maxChars, tipName(nodes[i], words).length));
    }, 0);
    var right = Math.round(longest * LABEL_CHAR_PX) + 24;
    var span = maxX > 0 ? maxX : 1;
    var xRange = ageAxis ? [maxX + span * 0.03, -span * 0.01] : [-span * 0.03, maxX + span * 0.01];

    var layout = {
      font: { family: font, color: colours.fg, size: 13 },
      paper_bgcolor: "rgba(0,0,0,0)",
      plot_bgcolor: "rgba(0,0,0,0)",
      margin: { l: 16, r: right, t: 16, b: 56 },
      hovermode: "closest",
      hoverlabel: {
        bgcolor: colours.surface,
        bordercolor: colours.border,
        font: { family: font, color: colours.fg, size: 13 },
      },
      dragmode: "pan",
      modebar: { bgcolor: "rgba(0,0,0,0)", color: colours.muted, activecolor: colours.fg },
      showlegend: false,
      xaxis: {
        title: { text: escapeText(tree.x_title || ""), standoff: 8 },
        range: xRange,
        zeroline: false,
        showgrid: true,
        gridcolor: colours.border,
        linecolor: colours.border,
        tickcolor: colours.border,
        ticks: "outside",
        fixedrange: false,
      },
      yaxis: {
        // the first tip at the top, so the plot reads in the same order as the text list
        range: [tips.length - 0.2, -0.8],
        visible: false,
        fixedrange: false,
      },
    };
    return { data: data, layout: layout, tips: tips.length };
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

  // The plot box is one image to assistive technology (role="img") and the page carries a text
  // equivalent, so plotly's tool bar buttons are kept out of the tab order: keyboard users go
  // straight past the figure instead of stepping through unlabelled controls inside an image.
  function keepOutOfTabOrder(div) {
    var controls = div.querySelectorAll("button, a[href], [tabindex]");
    for (var i = 0; i < controls.length; i++) controls[i].setAttribute("tabindex", "-1");
  }

  function markUnavailable(div) {
    div.classList.add("plot-unavailable");
  }

  function draw() {
    var div = document.getElementById("lineage-tree");
    if (!div) return;
    var Plotly = window.Plotly;
    var tree = window.AtlasData && window.AtlasData.tree;
    var nodes = validNodes(tree);
    if (!Plotly || typeof Plotly.newPlot !== "function" || !nodes) {
      markUnavailable(div);
      return;
    }

    // mode: "first" (newPlot), "screen" (redraw after a resize or a change of scheme) or
    // "paper" (fixed size, black on white, for printing).
    function render(mode) {
      var paper = mode === "paper";
      var width = paper ? PAPER_WIDTH_PX : div.clientWidth;
      var fig = buildFigure(div, tree, nodes, paper ? PAPER : screenColours(), width);
      if (paper) {
        fig.layout.width = PAPER_WIDTH_PX;
        fig.layout.height = Math.min(PAPER_MAX_HEIGHT_PX, Math.max(360, fig.tips * 16 + 72));
      }
      // Grow the box when the tips would be crowded; CSS gives the usual height.
      var needed = fig.tips * TIP_ROW_PX + 72;
      if (mode === "first" && needed > div.clientHeight) div.style.height = needed + "px";
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
        // A pointer cursor over points that lead somewhere.
        div.on("plotly_hover", function (event) {
          var point = event && event.points && event.points[0];
          div.classList.toggle("is-pointing", Boolean(point && point.customdata));
        });
        div.on("plotly_unhover", function () {
          div.classList.remove("is-pointing");
        });
        // Shorten or lengthen the labels when the box changes width.
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
          // back to the box's own size: react keeps the paper size, resize refits it
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
