// The script of a regdrift report. No framework. It adds the site look-up
// to each panel map — the site data sits beside the picture as JSON ([name,
// x, y, values...], x and y in image pixels); pointing shows the nearest
// site, a click or the search box marks one — and opens collapsed files for
// printing. Without it the page shows the same pictures and tables.
"use strict";
(function () {
  function setup(fig) {
    var data = JSON.parse(fig.querySelector("script.map-data").textContent);
    var img = fig.querySelector(".map-frame img");
    var hover = fig.querySelector(".map-hover");
    var mark = fig.querySelector(".map-mark");
    var readout = fig.querySelector(".map-readout");
    var status = fig.querySelector(".map-status");
    var form = fig.querySelector(".map-find");
    var input = form.querySelector("input");
    var sites = data.sites, area = data.area;
    var marked = -1;

    // Image pixels under a pointer event: the picture may be scaled.
    function pixelAt(ev) {
      var r = img.getBoundingClientRect();
      return [(ev.clientX - r.left) * data.width / r.width, (ev.clientY - r.top) * data.height / r.height];
    }
    function nearest(p) {
      if (p[0] < area[0] || p[0] > area[2] || p[1] < area[1] || p[1] > area[3]) return -1;
      var best = -1, bd = Infinity;
      for (var i = 0; i < sites.length; i++) {
        var dx = sites[i][1] - p[0], dy = sites[i][2] - p[1], d = dx * dx + dy * dy;
        if (d < bd) { bd = d; best = i; }
      }
      return best;
    }
    function place(ring, i) {
      if (i < 0) { ring.hidden = true; return; }
      ring.style.left = (100 * sites[i][1] / data.width) + "%";
      ring.style.top = (100 * sites[i][2] / data.height) + "%";
      ring.hidden = false;
    }
    function show(i) {
      readout.textContent = "";
      if (i < 0) return;
      var s = sites[i];
      var t = document.createElement("table");
      t.className = "map-site";
      var c = t.createCaption();
      c.textContent = "Site " + s[0];
      var body = t.createTBody();
      for (var k = 0; k < data.fields.length; k++) {
        var f = data.fields[k], row = body.insertRow();
        var th = document.createElement("th");
        th.scope = "row";
        th.textContent = f.unit ? f.label + " [" + f.unit + "]" : f.label;
        row.appendChild(th);
        var td = row.insertCell();
        td.className = "num";
        td.textContent = s[3 + k];
      }
      readout.appendChild(t);
    }
    function select(i) {
      marked = i;
      place(mark, i);
      place(hover, -1);
      show(i);
    }
    img.addEventListener("mousemove", function (ev) {
      var i = nearest(pixelAt(ev));
      place(hover, i === marked ? -1 : i);
      show(i >= 0 ? i : marked);
    });
    img.addEventListener("mouseleave", function () {
      place(hover, -1);
      show(marked);
    });
    img.addEventListener("click", function (ev) {
      var i = nearest(pixelAt(ev));
      if (i >= 0) { select(i); status.textContent = ""; }
    });
    form.addEventListener("submit", function (ev) {
      ev.preventDefault();
      var q = input.value.trim().toLowerCase();
      if (!q) return;
      var exact = -1, first = -1, n = 0;
      for (var i = 0; i < sites.length; i++) {
        var name = String(sites[i][0]).toLowerCase();
        if (name === q) { exact = i; break; }
        if (name.indexOf(q) >= 0) { n++; if (first < 0) first = i; }
      }
      if (exact >= 0) {
        select(exact);
        status.textContent = "Found " + sites[exact][0] + ".";
      } else if (first >= 0) {
        select(first);
        status.textContent = n === 1 ? "Found " + sites[first][0] + "." :
          n + " sites contain \u201c" + input.value.trim() + "\u201d; showing " + sites[first][0] + ".";
      } else {
        status.textContent = "No site is named \u201c" + input.value.trim() + "\u201d.";
      }
    });
    fig.querySelector(".map-tools").hidden = false;
  }
  var figs = document.querySelectorAll("figure.panel-map");
  for (var i = 0; i < figs.length; i++) setup(figs[i]);
  // Collapsed files print in full: open them for printing, close them after.
  var closed = [];
  window.addEventListener("beforeprint", function () {
    closed = Array.prototype.filter.call(document.querySelectorAll("details"), function (d) { return !d.open; });
    closed.forEach(function (d) { d.open = true; });
  });
  window.addEventListener("afterprint", function () {
    closed.forEach(function (d) { d.open = false; });
    closed = [];
  });
})();
