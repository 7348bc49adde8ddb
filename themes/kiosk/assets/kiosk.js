/* The gallery kiosk: nothing leads out of the site, and after a pause the atlas returns
 * quietly to its start page.
 *
 * The pause is data-idle-seconds on <body>. When it has passed without a touch, a key, a
 * click, a wheel turn or a mouse movement, a small "Start again" box appears; any input
 * closes it, and if nobody answers within a short grace time (a quarter of the pause, between
 * 1 and 15 seconds) the page goes back to index.html. On the start page itself the return is
 * only a scroll back to the top. Links that would leave the site (another origin or scheme,
 * or a download) become plain text, and a click on any that remain is refused.
 * Works from disk (file://) and over http; no eval, no inline handlers.
 */
(function () {
  "use strict";

  var body = document.body;
  var seconds = parseFloat(body.getAttribute("data-idle-seconds"));
  if (!(seconds > 0)) { seconds = 120; }
  var grace = Math.min(15, Math.max(1, seconds / 4));
  var root = body.getAttribute("data-root") || "";
  var isHome = body.classList.contains("page-home");
  var overlay = document.getElementById("kiosk-idle");
  var restart = document.getElementById("kiosk-restart");
  var idleTimer = null;
  var returnTimer = null;
  var before = null;

  function leaves(a) {
    if (a.hasAttribute("download")) { return true; }
    var href = a.getAttribute("href") || "";
    if (href.charAt(0) === "#") { return false; }
    if (/(^|\/)downloads\//.test(href)) { return true; }
    if (window.location.protocol === "file:") { return a.protocol !== "file:"; }
    return a.origin !== window.location.origin;
  }

  function unlinkOutside() {
    var links = Array.prototype.slice.call(document.querySelectorAll("a[href]"));
    links.forEach(function (a) {
      if (!leaves(a) || (overlay && overlay.contains(a))) { return; }
      var span = document.createElement("span");
      span.className = "kiosk-unlinked";
      while (a.firstChild) { span.appendChild(a.firstChild); }
      a.parentNode.replaceChild(span, a);
    });
  }

  function goHome() {
    window.location.href = root + "index.html";
  }

  function hide() {
    if (!overlay || overlay.hidden) { return; }
    overlay.hidden = true;
    body.classList.remove("kiosk-idle-shown");
    if (before && before.focus) { before.focus({preventScroll: true}); }
  }

  function show() {
    if (isHome) {
      window.scrollTo(0, 0);
      arm();
      return;
    }
    if (overlay) {
      before = document.activeElement;
      overlay.hidden = false;
      body.classList.add("kiosk-idle-shown");
      if (restart) { restart.focus({preventScroll: true}); }
    }
    returnTimer = window.setTimeout(goHome, grace * 1000);
  }

  function arm() {
    window.clearTimeout(idleTimer);
    window.clearTimeout(returnTimer);
    idleTimer = window.setTimeout(show, seconds * 1000);
  }

  function input(event) {
    if (overlay && !overlay.hidden && restart && event.target === restart) { return; }
    hide();
    arm();
  }

  ["pointerdown", "keydown", "wheel", "touchstart", "mousemove"].forEach(function (name) {
    document.addEventListener(name, input, {capture: true, passive: true});
  });
  document.addEventListener("click", function (event) {
    var a = event.target.closest ? event.target.closest("a[href]") : null;
    if (a && leaves(a)) { event.preventDefault(); }
  }, true);

  unlinkOutside();
  arm();
}());
