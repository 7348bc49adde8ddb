/* Distribution map: draws window.AtlasData.places into #atlas-map with plotly scattergeo.
 *
 * Data (written by the site builder):
 *   data/places.js  window.AtlasData.places = [{id, name, lat, lon, href, precision,
 *                     objects: [{id, title, href, clade_colour: 0..7 | null}]}]
 *   data/world.js   window.PlotlyGeoAssets.topojson.world_110m (Natural Earth outlines), so
 *                   plotly never fetches outlines from the network
 *   data/basemap.js optional window.AtlasData.basemap, a GeoJSON FeatureCollection of the study
 *                   area, drawn as filled land under the points
 * The plot's data-places attribute (space-separated place ids), when present, limits the map to
 * those places. One marker per place, its area proportional to the number of objects there, with
 * the count written beside it when above one; its colour is the objects' clade colour when they
 * all share one, else a neutral one. Generalised locations are drawn as rings. Clicking a marker
 * opens the place page. Colours come from the stylesheet's custom properties, so the dark scheme
 * works, and the map is redrawn when the scheme changes.
 *
 * A plot div with data-character="ID" (a character page) draws a map of that character's states
 * instead: the state codes come from data/matrix.js (window.AtlasData.matrix: {objects: [ids],
 * codes: {id: one letter per object}, polymorphic: {id: {index: [states]}}}, see
 * atlas/site/statemaps.py), the categories and their words from the radio buttons of the
 * page's fieldset.state-switch (value "" for all states, "0", "1", ... "?" or "-"), which the
 * script shows and listens to. Each category has its own colour and marker shape and a legend
 * entry; a place where several states were recorded gets one marker per state, set slightly
 * apart around it, each with its own count. Choosing one state shows its map alone.
 * A data-outline attribute ("lat,lon lat,lon ...": a clade's convex hull) is drawn as a dashed
 * outline (closed for three or more vertices, a line for two).
 *
 * Interface words can be translated by the template through data attributes on the plot div:
 * data-text-object ("object"), data-text-objects ("objects"), data-text-none ("No objects"),
 * data-text-more ("more"), data-text-generalised ("Location generalised"), data-text-outline
 * ("Range outline").
 *
 * No globals are created. If plotly, the outlines or the places are missing, nothing is drawn,
 * the empty box is hidden (class plot-unavailable) and the page's text equivalent stays.
 */
(function () {
  "use strict";

  var MAX_LISTED = 12; // objects named in a hover box before "and N more"
  var MIN_SPAN_DEG = 4; // smallest map extent around the points, in degrees
  var MARGIN_FRACTION = 0.25; // room left around the points, as a fraction of their extent
  var PAPER_WIDTH_PX = 660; // printed size: A4 or US Letter less margins, at 96 px per inch
  var PAPER_HEIGHT_PX = 440;

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

  function siteHref(href) {
    if (typeof href !== "string" || href === "") return null;
    if (/^[a-z][a-z0-9+.-]*:/i.test(href) || href.charAt(0) === "/" || href.charAt(0) === "\\") {
      return null;
    }
    return (document.body.dataset.root || "") + href;
  }

  function isCoordinate(value, limit) {
    return typeof value === "number" && isFinite(value) && Math.abs(value) <= limit;
  }

  function selectPlaces(all, wanted) {
    var usable = all.filter(function (p) {
      return p && isCoordinate(p.lat, 90) && isCoordinate(p.lon, 180);
    });
    if (wanted.length === 0) return usable;
    var keep = new Set(wanted);
    return usable.filter(function (p) {
      return keep.has(p.id);
    });
  }

  // The clade colour index shared by all of a place's objects, or null when they differ.
  function sharedClade(objects) {
    var shared = null;
    for (var i = 0; i < objects.length; i++) {
      var c = objects[i] && objects[i].clade_colour;
      if (typeof c !== "number" || c < 0 || c > 7 || Math.floor(c) !== c) return null;
      if (shared === null) shared = c;
      else if (shared !== c) return null;
    }
    return shared;
  }

  function interfaceWords(div) {
    var d = div.dataset;
    return {
      object: d.textObject || "object",
      objects: d.textObjects || "objects",
      none: d.textNone || "No objects",
      more: d.textMore || "more",
      generalised: d.textGeneralised || "Location generalised",
      outline: d.textOutline || "Range outline",
    };
  }

  function hoverText(place, words) {
    var objects = Array.isArray(place.objects) ? place.objects : [];
    var lines = ["<b>" + escapeText(place.name || place.id) + "</b>"];
    if (place.precision === "generalised") {
      lines.push("<i>" + escapeText(words.generalised) + "</i>");
    }
    if (objects.length === 0) {
      lines.push(escapeText(words.none));
    } else {
      var noun = objects.length === 1 ? words.object : words.objects;
      lines.push(objects.length + " " + escapeText(noun) + ":");
    }
    objects.slice(0, MAX_LISTED).forEach(function (o) {
      lines.push("\u2022 " + escapeText((o && (o.title || o.id)) || ""));
    });
    if (objects.length > MAX_LISTED) {
      lines.push("+ " + (objects.length - MAX_LISTED) + " " + escapeText(words.more));
    }
    return lines.join("<br>");
  }

  // On the Natural Earth projection, the screen length of one degree of longitude divided by
  // that of one degree of latitude, at latitude phi (radians). From the projection's polynomial
  // (Savric, Jenny, Patterson, Petrovic & Hurni 2011, Cartography and Geographic Information
  // Science 38(4)): x = lambda * l(phi), y = m(phi), so the ratio is l(phi) / m'(phi).
  // At the equator 0.8707 / 1.007226 = 0.864; at 45 degrees about 0.79.
  function lonPerLatScale(phi) {
    var p2 = phi * phi;
    var p4 = p2 * p2;
    var p6 = p4 * p2;
    var p8 = p4 * p4;
    var p10 = p8 * p2;
    var l = 0.8707 - 0.131979 * p2 - 0.013791 * p4 + 0.003971 * p10 - 0.001529 * p10 * p2;
    var dm =
      1.007226 + 3 * 0.015085 * p2 - 7 * 0.044475 * p6 + 9 * 0.028874 * p8 - 11 * 0.005916 * p10;
    return Math.max(l / dm, 0.2);
  }

  // Longitude/latitude ranges around the points, with a margin, widened in one direction so
  // that their shape matches the plot box (plotly keeps the map's aspect and would otherwise
  // leave bands of empty space), and kept on the globe.
  function fittedRanges(places, boxWidth, boxHeight) {
    var lats = places.map(function (p) {
      return p.lat;
    });
    var lons = places.map(function (p) {
      return p.lon;
    });
    function padded(values) {
      var lo = Math.min.apply(null, values);
      var hi = Math.max.apply(null, values);
      var pad = Math.max((hi - lo) * MARGIN_FRACTION, (MIN_SPAN_DEG - (hi - lo)) / 2, 0.5);
      return [lo - pad, hi + pad];
    }
    function widen(range, span) {
      var mid = (range[0] + range[1]) / 2;
      return [mid - span / 2, mid + span / 2];
    }
    function clamp(range, limit) {
      return [Math.max(-limit, range[0]), Math.min(limit, range[1])];
    }
    var lat = padded(lats);
    var lon = padded(lons);
    if (boxWidth > 0 && boxHeight > 0) {
      var k = lonPerLatScale(((lat[0] + lat[1]) / 2) * (Math.PI / 180));
      var wanted = boxWidth / boxHeight;
      var shape = ((lon[1] - lon[0]) * k) / (lat[1] - lat[0]);
      if (shape < wanted) lon = widen(lon, ((lat[1] - lat[0]) * wanted) / k);
      else lat = widen(lat, ((lon[1] - lon[0]) * k) / wanted);
    }
    return { lat: clamp(lat, 90), lon: clamp(lon, 180) };
  }

  // Signed area of a ring in the lon/lat plane: positive when counter-clockwise.
  function signedArea(ring) {
    var sum = 0;
    for (var i = 0, j = ring.length - 1; i < ring.length; j = i++) {
      sum += (ring[j][0] - ring[i][0]) * (ring[j][1] + ring[i][1]);
    }
    return sum / 2;
  }

  // Outer rings of every Polygon / MultiPolygon in a GeoJSON FeatureCollection. Rings are
  // turned clockwise, the winding the spherical fill expects for a small area (a
  // counter-clockwise ring would be filled as the rest of the globe).
  function outerRings(collection) {
    var rings = [];
    var features = (collection && collection.features) || [];
    features.forEach(function (f) {
      var g = f && f.geometry;
      if (!g) return;
      var polygons = [];
      if (g.type === "Polygon") polygons = [g.coordinates];
      else if (g.type === "MultiPolygon") polygons = g.coordinates || [];
      polygons.forEach(function (polygon) {
        var ring = polygon && polygon[0];
        if (!Array.isArray(ring) || ring.length < 4) return;
        var clean = ring.filter(function (pt) {
          return Array.isArray(pt) && isCoordinate(pt[0], 180) && isCoordinate(pt[1], 90);
        });
        if (clean.length < 4) return;
        rings.push(signedArea(clean) < 0 ? clean : clean.slice().reverse());
      });
    });
    return rings;
  }

  // ---- States of one character (a character page) ----------------------------------------

  // Okabe & Ito (2008), in the order of assets/tree.js, so a state has one colour on the page;
  // unknown and not applicable are greys. Shapes tell the states apart without colour.
  var STATE_COLOURS = ["#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00",
    "#CC79A7", "#999999"];
  var STATE_SYMBOLS = ["circle", "square", "diamond", "triangle-up", "pentagon", "hexagon",
    "star", "triangle-down"];
  var UNKNOWN = { colour: "#5f5f5f", symbol: "star-diamond" };
  var INAPPLICABLE = { colour: "#c8c8c8", symbol: "x" };
  var OFFSET_FRACTION = 0.018; // markers of several states at one place: set apart by this much
  // of the map's latitude span

  function categoryStyle(key) {
    if (key === "?") return UNKNOWN;
    if (key === "-") return INAPPLICABLE;
    var k = Math.min(parseInt(key, 10) || 0, STATE_COLOURS.length - 1);
    return { colour: STATE_COLOURS[k], symbol: STATE_SYMBOLS[k] };
  }

  // The categories offered by the page's radio buttons: [{key, name}], in page order.
  function stateCategories(control) {
    var out = [];
    if (!control) return out;
    var inputs = control.querySelectorAll('input[type="radio"]');
    for (var i = 0; i < inputs.length; i++) {
      var key = inputs[i].value;
      if (!key) continue;
      var d = inputs[i].dataset;
      out.push({ key: key, name: (d.symbol || key) + ": " + (d.description || "") });
    }
    return out;
  }

  // Per place, the number of its objects in each category: [{key: count}].
  function stateCounts(places, matrix, character) {
    var index = {};
    matrix.objects.forEach(function (id, i) {
      index[id] = i;
    });
    var codes = matrix.codes[character];
    var poly = (matrix.polymorphic && matrix.polymorphic[character]) || {};
    return places.map(function (p) {
      var counts = {};
      (Array.isArray(p.objects) ? p.objects : []).forEach(function (o) {
        var i = o && index[o.id];
        if (typeof i !== "number") return;
        var ch = codes.charAt(i);
        var keys;
        if (ch === "*") keys = (poly[i] || []).map(String);
        else if (ch === "?" || ch === "-") keys = [ch];
        else keys = [String(parseInt(ch, 36))];
        keys.forEach(function (k) {
          counts[k] = (counts[k] || 0) + 1;
        });
      });
      return counts;
    });
  }

  function stateHover(place, counts, cats, words) {
    var lines = ["<b>" + escapeText(place.name || place.id) + "</b>"];
    if (place.precision === "generalised") {
      lines.push("<i>" + escapeText(words.generalised) + "</i>");
    }
    cats.forEach(function (c) {
      var n = counts[c.key];
      if (!n) return;
      lines.push(escapeText(c.name) + ": " + n + " " + escapeText(n === 1 ? words.object
        : words.objects));
    });
    return lines.join("<br>");
  }

  // One trace per category shown; with all shown, markers of one place are set around it.
  function stateTraces(places, state, ranges, colours, words, font) {
    var shown = state.cats.filter(function (c) {
      return !state.shown || c.key === state.shown;
    });
    var spread = state.shown ? 0 : (ranges.lat[1] - ranges.lat[0]) * OFFSET_FRACTION;
    var k = lonPerLatScale((((ranges.lat[0] + ranges.lat[1]) / 2) * Math.PI) / 180);
    var traces = shown.map(function (c) {
      var style = categoryStyle(c.key);
      var lat = [], lon = [], size = [], text = [], hover = [], links = [], symbol = [];
      var generalisedAt = [];
      places.forEach(function (p, i) {
        var counts = state.counts[i];
        var n = counts[c.key];
        if (!n) return;
        var here = state.cats.filter(function (d) {
          return counts[d.key];
        });
        var dy = 0, dx = 0;
        if (spread && here.length > 1) {
          var angle = (2 * Math.PI * here.indexOf(c)) / here.length;
          dy = spread * Math.cos(angle);
          dx = (spread * Math.sin(angle)) / k;
        }
        lat.push(p.lat + dy);
        lon.push(p.lon + dx);
        size.push(9 + 5 * Math.sqrt(n - 1));
        text.push(n > 1 ? String(n) : "");
        hover.push(stateHover(p, counts, state.cats, words));
        links.push(siteHref(p.href));
        generalisedAt.push(p.precision === "generalised");
        symbol.push(p.precision === "generalised" ? style.symbol + "-open" : style.symbol);
      });
      return {
        type: "scattergeo",
        mode: "markers+text",
        name: c.name,
        lat: lat,
        lon: lon,
        text: text,
        textposition: "top right",
        textfont: { family: font, size: 12, color: colours.fg },
        hovertext: hover,
        hoverinfo: "text",
        customdata: links,
        marker: {
          size: size,
          sizemode: "diameter",
          symbol: symbol,
          color: style.colour,
          opacity: 0.95,
          line: {
            width: generalisedAt.map(function (g) {
              return g ? 3 : 1.25;
            }),
            color: colours.markerLine,
          },
        },
        showlegend: true,
      };
    });
    return traces.filter(function (t) {
      return t.lat.length > 0; // a state whose objects are all off the map draws nothing
    });
  }

  // "lat,lon lat,lon ..." as [[lat, lon]], dropping anything that is not a coordinate.
  function parseOutline(text) {
    return String(text || "")
      .split(/\s+/)
      .map(function (pair) {
        var v = pair.split(",").map(Number);
        return v.length === 2 && isCoordinate(v[0], 90) && isCoordinate(v[1], 180) ? v : null;
      })
      .filter(Boolean);
  }

  function outlineTrace(outline, colours, words) {
    var ring = outline.length >= 3 ? outline.concat([outline[0]]) : outline;
    return {
      type: "scattergeo",
      mode: "lines",
      name: words.outline,
      lat: ring.map(function (v) {
        return v[0];
      }),
      lon: ring.map(function (v) {
        return v[1];
      }),
      line: { color: colours.fg, width: 2, dash: "dash" },
      hoverinfo: "skip",
      showlegend: false,
    };
  }

  // Colours for the screen come from the stylesheet (so the dark scheme works); on paper the
  // map is drawn in greys on white, with the clade colours kept.
  function screenColours() {
    return {
      fg: cssVar("--fg", "#1c1f23"),
      bg: cssVar("--bg", "#ffffff"),
      surface: cssVar("--surface", "#f4f3ef"),
      border: cssVar("--border", "#cfccc4"),
      land: cssVar("--land", "#eceae4"),
      landLine: cssVar("--land-line", "#b9b5ab"),
      region: cssVar("--region", "#dde6d6"),
      markerLine: cssVar("--marker-line", "#1c1f23"),
      muted: cssVar("--muted", "#565c63"),
      neutral: cssVar("--muted", "#565c63"),
      clades: cladeColours(),
    };
  }

  function cladeColours() {
    return [0, 1, 2, 3, 4, 5, 6, 7].map(function (i) {
      return cssVar("--clade-" + i, "#0072b2");
    });
  }

  function paperColours() {
    return {
      fg: "#000000",
      bg: "#ffffff",
      surface: "#ffffff",
      border: "#999999",
      land: "#eeeeee",
      landLine: "#999999",
      region: "#d9d9d9",
      markerLine: "#000000",
      muted: "#333333",
      neutral: "#666666",
      clades: cladeColours(),
    };
  }

  // view: {outline: [[lat, lon]], state: null | {cats, counts, shown}}
  function buildFigure(places, basemap, box, colours, words, view) {
    var font = getComputedStyle(document.body).fontFamily || "sans-serif";
    var data = [];

    outerRings(basemap).forEach(function (ring) {
      data.push({
        type: "scattergeo",
        mode: "lines",
        lon: ring.map(function (pt) {
          return pt[0];
        }),
        lat: ring.map(function (pt) {
          return pt[1];
        }),
        fill: "toself",
        fillcolor: colours.region,
        line: { color: colours.landLine, width: 1 },
        hoverinfo: "skip",
        showlegend: false,
      });
    });

    if (view.outline.length >= 2) data.push(outlineTrace(view.outline, colours, words));
    var ranges = fittedRanges(places, box.width, box.height);
    if (view.state) {
      data = data.concat(stateTraces(places, view.state, ranges, colours, words, font));
      return { data: data, layout: mapLayout(ranges, colours, font, true) };
    }

    var counts = places.map(function (p) {
      return Array.isArray(p.objects) ? p.objects.length : 0;
    });
    var fills = places.map(function (p) {
      var c = sharedClade(Array.isArray(p.objects) ? p.objects : []);
      return c === null ? colours.neutral : colours.clades[c];
    });
    var generalised = places.map(function (p) {
      return p.precision === "generalised";
    });
    data.push({
      type: "scattergeo",
      mode: "markers+text",
      lon: places.map(function (p) {
        return p.lon;
      }),
      lat: places.map(function (p) {
        return p.lat;
      }),
      text: counts.map(function (n) {
        return n > 1 ? String(n) : "";
      }),
      textposition: "top right",
      textfont: { family: font, size: 12, color: colours.fg },
      hovertext: places.map(function (p) {
        return hoverText(p, words);
      }),
      hoverinfo: "text",
      customdata: places.map(function (p) {
        return siteHref(p.href);
      }),
      marker: {
        // area proportional to the count: diameter grows with its square root
        size: counts.map(function (n) {
          return 8 + 5 * Math.sqrt(Math.max(n, 1) - 1);
        }),
        sizemode: "diameter",
        symbol: generalised.map(function (g) {
          return g ? "circle-open" : "circle";
        }),
        color: fills,
        opacity: 0.92,
        line: {
          width: generalised.map(function (g) {
            return g ? 3 : 1.25;
          }),
          color: generalised.map(function (g, i) {
            return g ? fills[i] : colours.markerLine;
          }),
        },
      },
      showlegend: false,
    });

    return { data: data, layout: mapLayout(ranges, colours, font, false) };
  }

  function mapLayout(ranges, colours, font, legend) {
    return {
      font: { family: font, color: colours.fg, size: 13 },
      paper_bgcolor: "rgba(0,0,0,0)",
      margin: { l: 0, r: 0, t: 0, b: 0 },
      hovermode: "closest",
      hoverlabel: {
        bgcolor: colours.surface,
        bordercolor: colours.border,
        font: { family: font, color: colours.fg, size: 13 },
        align: "left",
      },
      dragmode: "pan",
      modebar: { bgcolor: "rgba(0,0,0,0)", color: colours.muted, activecolor: colours.fg },
      showlegend: legend,
      legend: {
        orientation: "h",
        x: 0,
        y: 0,
        yanchor: "bottom",
        bgcolor: colours.bg,
        bordercolor: colours.border,
        borderwidth: 1,
        font: { family: font, color: colours.fg, size: 12 },
      },
      geo: {
        resolution: 110,
        fitbounds: false,
        projection: { type: "natural earth" },
        lataxis: { range: ranges.lat },
        lonaxis: { range: ranges.lon },
        showland: true,
        landcolor: colours.land,
        showocean: true,
        oceancolor: colours.bg,
        showlakes: false,
        showrivers: false,
        showcountries: true,
        countrycolor: colours.landLine,
        countrywidth: 0.6,
        showcoastlines: true,
        coastlinecolor: colours.landLine,
        coastlinewidth: 0.8,
        showframe: false,
        bgcolor: "rgba(0,0,0,0)",
      },
    };
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
    modeBarButtonsToRemove: ["sendChartToCloud", "select2d", "lasso2d", "toggleHover"],
    toImageButtonOptions: { format: "svg", filename: "distribution-map" },
  };

  // plotly's tool bar titles in the page's language, from data-text-plot-* on the map (plotly's
  // own lookup: config.locale names an entry of config.locales mapping its English titles).
  var PLOT_TITLES = {plotZoomIn: "Zoom in", plotZoomOut: "Zoom out", plotReset: "Reset",
                     plotPan: "Pan", plotDownload: "Download plot"};
  function plotConfig(div) {
    var dictionary = {};
    Object.keys(PLOT_TITLES).forEach(function (key) {
      var text = div.dataset["text" + key.charAt(0).toUpperCase() + key.slice(1)];
      if (text && text !== PLOT_TITLES[key]) dictionary[PLOT_TITLES[key]] = text;
    });
    if (!Object.keys(dictionary).length) return CONFIG;
    var lang = document.documentElement.lang || "en";
    var config = Object.assign({}, CONFIG, {locale: lang, locales: {}});
    config.locales[lang] = {dictionary: dictionary};
    return config;
  }

  // The plot box is a labelled group (role="group": an image role may not hold plotly's tool
  // bar buttons) and the page carries a text equivalent, so the buttons are kept out of the tab
  // order: keyboard users go straight past the figure instead of through unlabelled controls.
  function keepOutOfTabOrder(div) {
    var controls = div.querySelectorAll("button, a[href], [tabindex]");
    for (var i = 0; i < controls.length; i++) controls[i].setAttribute("tabindex", "-1");
  }

  function markUnavailable(div) {
    div.classList.add("plot-unavailable");
  }

  function hasWorldOutlines() {
    var assets = window.PlotlyGeoAssets;
    return Boolean(assets && assets.topojson && assets.topojson.world_110m);
  }

  function draw() {
    var div = document.getElementById("atlas-map");
    if (!div) return;
    var Plotly = window.Plotly;
    var all = window.AtlasData && window.AtlasData.places;
    // Without the bundled outlines plotly would fetch them from the network: do not draw.
    var ready = Plotly && typeof Plotly.newPlot === "function" && Array.isArray(all);
    if (!ready || !hasWorldOutlines()) {
      markUnavailable(div);
      return;
    }
    var wanted = (div.dataset.places || "").split(/\s+/).filter(Boolean);
    var places = selectPlaces(all, wanted);
    if (places.length === 0) {
      markUnavailable(div);
      return;
    }
    var basemap = window.AtlasData.basemap || null;
    var view = { outline: parseOutline(div.dataset.outline), state: null };
    var figure = div.closest("figure");
    var control = figure && figure.querySelector(".state-switch");
    var character = div.dataset.character || "";
    if (character) {
      var matrix = window.AtlasData.matrix;
      var cats = stateCategories(control);
      if (!matrix || !Array.isArray(matrix.objects) || !matrix.codes ||
          typeof matrix.codes[character] !== "string" || cats.length === 0) {
        markUnavailable(div);
        return;
      }
      view.state = { cats: cats, counts: stateCounts(places, matrix, character), shown: "" };
      places = places.filter(function (p, i) {
        return Object.keys(view.state.counts[i]).length > 0;
      });
      view.state.counts = view.state.counts.filter(function (c) {
        return Object.keys(c).length > 0;
      });
      if (places.length === 0) {
        markUnavailable(div);
        return;
      }
    }

    // mode: "first" (newPlot), "screen" (redraw after a resize or a change of scheme) or
    // "paper" (fixed size, greys on white, for printing).
    function render(mode) {
      var paper = mode === "paper";
      var box = paper
        ? { width: PAPER_WIDTH_PX, height: PAPER_HEIGHT_PX }
        : { width: div.clientWidth, height: div.clientHeight };
      var colours = paper ? paperColours() : screenColours();
      var fig = buildFigure(places, basemap, box, colours, interfaceWords(div), view);
      if (paper) {
        fig.layout.width = PAPER_WIDTH_PX;
        fig.layout.height = PAPER_HEIGHT_PX;
      }
      return (mode === "first" ? Plotly.newPlot : Plotly.react)(div, fig.data, fig.layout,
                                                                 plotConfig(div));
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
        if (figure) figure.classList.add("has-plot");
        if (view.state && control) {
          control.hidden = false;
          control.addEventListener("change", function (event) {
            var input = event.target;
            if (!input || input.name !== "state-shown") return;
            view.state.shown = input.value;
            render("screen");
          });
        }
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
        // Refit the ranges when the box changes shape (phone rotated, window resized).
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
