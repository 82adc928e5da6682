/* speciakin workbench: the grid's code (dash-ag-grid) loaded after the page's first view.
 *
 * The grid (dash-ag-grid, 2.2 MB with its chunk), which the first view (tab 1) does not draw, is not
 * listed by the page: this file stands in for it as the library the Dash renderer looks components up
 * in (window.dash_ag_grid).  The real bundle is fetched once the first figure is drawn and the browser
 * is idle, or at once when a table is to be drawn earlier; a table drawn before it has arrived shows
 * "loading the table" and is drawn as soon as it has.  The real bundle puts itself in this object's
 * place, so every later table is the library's own component.
 *
 * A grid with the class "grid-warm-up" (an empty, hidden one in the page) waits for that idle fetch
 * instead of asking for the bundle: drawn then, it does the grid's first-time work (its chunk, its
 * styles) in the idle time too, instead of when the first real table is opened.
 */
(function () {
  "use strict";
  var me = document.currentScript;

  function script(src) {
    return new Promise(function (resolve, reject) {
      var tag = document.createElement("script");
      tag.src = src;
      tag.async = true;
      tag.onload = function () { resolve(); };
      tag.onerror = function () { reject(new Error("could not be loaded: " + src + "; reload the page")); };
      document.head.appendChild(tag);
    });
  }

  var grid = me.getAttribute("data-grid");
  var loading = null;
  var stand = {};
  var idleDone;
  var idle = new Promise(function (resolve) { idleDone = resolve; });

  function load() {
    if (!loading) {
      loading = script(grid).catch(function (error) {
        loading = null;
        throw error;
      });
    }
    return loading;
  }

  function loaded() {
    var lib = window.dash_ag_grid;
    return lib && lib !== stand ? lib.AgGrid : null;
  }

  function AgGrid(props) {
    var React = window.React;
    var real = loaded();
    var failed = React.useState(null);
    var redraw = React.useState(0)[1];
    var warmUp = String(props.className || "").split(" ").indexOf("grid-warm-up") >= 0;
    React.useEffect(function () {
      if (!real) {
        (warmUp ? idle : load()).then(function () { redraw(function (n) { return n + 1; }); }, failed[1]);
      }
    }, [real]);
    if (real) {
      return React.createElement(real, props);
    }
    return React.createElement("div", {className: "grid-loading", role: "status"},
                               failed[0] ? "the table's code " + failed[0].message : "loading the table ...");
  }

  function prefetch() {
    load().then(idleDone, function () { /* a table drawn later says so */ });
  }

  if (grid) {
    stand.AgGrid = AgGrid;
    window.dash_ag_grid = stand;
    // fetched once the first figure is drawn (or after 4 s) and the main thread is idle
    window.addEventListener("load", function () {
      var waited = 0;
      var timer = setInterval(function () {
        waited += 100;
        if (document.querySelector(".js-plotly-plot .main-svg") || waited >= 4000) {
          clearInterval(timer);
          if (window.requestIdleCallback) {
            window.requestIdleCallback(prefetch, {timeout: 1000});
          } else {
            setTimeout(prefetch, 200);
          }
        }
      }, 100);
    });
  }
})();
