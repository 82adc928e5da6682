/* speciakin workbench: the grid's code (dash-ag-grid) loaded after the page's first view.
 *
 * The grid (dash-ag-grid, 2.2 MB with its chunk), which the first view (tab 1) does not draw, is not
 * listed by the page: this file stands in for it as the library the Dash renderer looks components up
 * in (window.dash_ag_grid).  The real bundle is fetched once the first figure is drawn and the browser
 * is idle, or at once when a table is to be drawn earlier; a table drawn before it has arrived shows
 * "loading the table" and is drawn as soon as it has.  The real bundle puts itself in this object's
 * place, so every later table is the library's own component.
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

  var grid = me.getAttribute("data-grid"), chunk = me.getAttribute("data-chunk");
  var loading = null;
  var stand = {};

  function load() {
    if (!loading) {
      loading = script(grid).then(function () {
        if (chunk) {  // the grid's own code, which the bundle loads when the first table is drawn
          var hint = document.createElement("link");
          hint.rel = "prefetch"; hint.as = "script"; hint.href = chunk;
          document.head.appendChild(hint);
        }
      }, function (error) {
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
    React.useEffect(function () {
      if (!real) {
        load().then(function () { redraw(function (n) { return n + 1; }); }, failed[1]);
      }
    }, [real]);
    if (real) {
      return React.createElement(real, props);
    }
    return React.createElement("div", {className: "grid-loading", role: "status"},
                               failed[0] ? "the table's code " + failed[0].message : "loading the table ...");
  }

  function prefetch() {
    load().catch(function () { /* a table drawn later says so */ });
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
