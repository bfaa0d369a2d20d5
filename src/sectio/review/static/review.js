/* sectio review page: plain JavaScript, no libraries, no network beyond this server. */
(function () {
  "use strict";
  var token = new URLSearchParams(location.search).get("token") || "";
  var $ = function (id) { return document.getElementById(id); };
  var viewer = $("viewer"), stage = $("stage"), base = $("base"), layer = $("layer"),
      marks = $("marks");
  var SVG = "http://www.w3.org/2000/svg";

  var TOOLS = {
    grains: [["pan", "Move", "Drag to move, wheel to zoom"],
             ["join", "Join", "Click two neighbouring grains: the boundary between them is erased"],
             ["cut", "Cut", "Draw across a grain, boundary to boundary: a boundary is drawn there"],
             ["exclude", "Leave out", "Click the corners of a region (scratch, inclusion, pull-out, unetched); double-click to close"],
             ["twin", "Twin", "Click the two grains on either side of a twin boundary"],
             ["grain_boundary", "Grain bdy", "Click the two grains of a boundary marked as twin: it is a grain boundary"]],
    particles: [["pan", "Move", "Drag to move, wheel to zoom"],
                ["delete", "Delete", "Click a particle that is not one"],
                ["add", "Add", "Click the corners of a missed particle; double-click to close"],
                ["split", "Split", "Draw across touching particles to split them"],
                ["join", "Join", "Click two pieces of one particle"],
                ["exclude", "Leave out", "Click the corners of a region to leave out; double-click to close"]]
  };
  var S = { fields: null, field: null, tool: "pan", scale: 1, tx: 0, ty: 0, pts: [],
            drawing: false, dragging: null, prevNums: null };
  window.sectioReview = S;

  function api(path, body) {
    var opt = { headers: { "X-Token": token } };
    if (body !== undefined) {
      opt.method = "POST"; opt.body = JSON.stringify(body);
      opt.headers["Content-Type"] = "application/json";
    }
    return fetch(path, opt).then(function (r) {
      return r.json().then(function (j) {
        if (!r.ok) { throw new Error(j.error || ("HTTP " + r.status)); }
        return j;
      });
    });
  }
  function say(text, err) { var m = $("msg"); m.textContent = text || ""; m.className = err ? "err" : ""; }
  function fmt(v, d) {
    if (v === null || v === undefined) { return "–"; }
    if (typeof v !== "number") { return String(v); }
    if (Number.isInteger(v)) { return String(v); }
    return Math.abs(v) >= 1000 ? v.toFixed(0) : v.toPrecision(d || 4);
  }
  function ci(c, d) { return c ? "[" + fmt(c[0], d) + ", " + fmt(c[1], d) + "]" : "–"; }

  /* ---- field list ---------------------------------------------------------------- */
  function headline(f) {
    var n = f.numbers;
    return f.kind === "grains" ? fmt(n.mean_intercept_um, 3) + " µm"
                               : fmt(100 * (n.area_fraction || 0), 3) + " %";
  }
  function sumline(kind, s) {
    if (kind === "grains") {
      return "ℓ̄ " + fmt(s.mean_intercept_um, 3) + " µm " + ci(s.mean_intercept_ci95_um, 3) +
             ", G " + fmt(s.astm_g, 3) + " (" + s.n_fields + " fields)";
    }
    return "A_A " + fmt(100 * (s.area_fraction || 0), 3) + " % " +
           (s.area_fraction_ci95 ? ci(s.area_fraction_ci95.map(function (x) { return 100 * x; }), 3) + " %" : "") +
           " (" + s.n_fields + " fields)";
  }
  function renderList() {
    var L = $("list"); L.textContent = "";
    S.fields.groups.forEach(function (g) {
      var h = document.createElement("h3"); h.textContent = g.name + " · " + g.kind; L.appendChild(h);
      var p = document.createElement("div"); p.className = "sum"; p.textContent = sumline(g.kind, g.summary);
      L.appendChild(p);
      var ul = document.createElement("ul");
      g.fields.forEach(function (f) {
        var li = document.createElement("li"); li.dataset.id = f.id;
        if (S.field && S.field.id === f.id) { li.className = "on"; }
        var t = document.createElement("span"); t.textContent = f.image; li.appendChild(t);
        if (f.edits) { badge(li, "edits", f.edits + " edit" + (f.edits > 1 ? "s" : "")); }
        if (f.status) { badge(li, f.status, f.status); }
        if (f.flags && f.flags.length) { badge(li, "flag", "flag"); li.title = f.flags.join("; "); }
        var n = document.createElement("span"); n.className = "n"; n.textContent = headline(f); li.appendChild(n);
        li.addEventListener("click", function () { openField(f.id); });
        ul.appendChild(li);
      });
      L.appendChild(ul);
    });
  }
  function badge(li, cls, text) {
    var b = document.createElement("span"); b.className = "b " + cls; b.textContent = text; li.appendChild(b);
  }
  function loadList() {
    return api("api/fields").then(function (j) { S.fields = j; $("root").textContent = j.root; renderList(); });
  }

  /* ---- one field ----------------------------------------------------------------- */
  function openField(id) {
    say("opening…");
    return api("api/field/" + id).then(function (f) {
      var first = !S.field || S.field.id !== f.id;
      S.field = f; S.pts = []; S.prevNums = first ? null : S.prevNums;
      if (first) {
        base.onload = function () { fit(); };
        base.src = "api/field/" + id + "/image.png?token=" + encodeURIComponent(token);
        base.style.width = f.shape_px[1] + "px"; base.style.height = f.shape_px[0] + "px";
        layer.style.width = base.style.width; layer.style.height = base.style.height;
        marks.setAttribute("width", f.shape_px[1]); marks.setAttribute("height", f.shape_px[0]);
        marks.setAttribute("viewBox", "0 0 " + f.shape_px[1] + " " + f.shape_px[0]);
        fit();
        buildTools(f.kind);
      }
      showField(f);
      say("");
      renderList();
    }).catch(function (e) { say(e.message, true); });
  }
  function showField(f) {
    layer.src = "api/field/" + f.id + "/layer.png?token=" + encodeURIComponent(token) + "&v=" + f.version;
    $("ftitle").textContent = f.image;
    $("fstatus").textContent = f.status === "rejected" ? "Rejected: " + f.reason
      : (f.status === "reviewed" ? "Reviewed" : "Not yet reviewed");
    var n = f.numbers, rows;
    if (f.kind === "grains") {
      rows = [["Mean lineal intercept", fmt(n.mean_intercept_um) + " µm", "mean_intercept_um"],
              ["Crossings", fmt(n.intercept_count), "intercept_count"],
              ["Grains", fmt(n.grain_count), "grain_count"],
              ["G (intercept)", fmt(n.astm_g_intercept, 3), "astm_g_intercept"],
              ["Grains per mm²", fmt(n.grains_per_mm2), "grains_per_mm2"],
              ["Left out", fmt(100 * (n.left_out_fraction || 0), 3) + " %", "left_out_fraction"]];
    } else {
      rows = [["Area fraction", fmt(100 * n.area_fraction) + " %", "area_fraction"],
              ["Particles", fmt(n.particle_count), "particle_count"],
              ["Counted (not cut by edge)", fmt(n.particles_counted), "particles_counted"],
              ["Mean ECD", fmt(n.mean_ecd_um) + " µm", "mean_ecd_um"],
              ["Particles per µm²", fmt(n.particles_per_um2), "particles_per_um2"],
              ["Left out", fmt(100 * (n.left_out_fraction || 0), 3) + " %", "left_out_fraction"]];
    }
    table($("fnums"), rows, S.prevNums);
    S.prevNums = n;
    var s = f.summary;
    $("gname").textContent = f.group;
    table($("snums"), f.kind === "grains" ? [
      ["Fields", fmt(s.n_fields)], ["Mean lineal intercept", fmt(s.mean_intercept_um) + " µm"],
      ["95 % CI", ci(s.mean_intercept_ci95_um) + " µm"], ["% rel. accuracy", fmt(s.relative_accuracy_pct, 3)],
      ["G", fmt(s.astm_g, 3) + " " + ci(s.astm_g_ci95, 3)], ["CI from", s.ci_basis || "–"]] : [
      ["Fields", fmt(s.n_fields)], ["Area fraction", fmt(100 * (s.area_fraction || 0)) + " %"],
      ["95 % CI", s.area_fraction_ci95 ? ci(s.area_fraction_ci95.map(function (x) { return 100 * x; })) + " %" : "–"],
      ["Mean ECD", fmt(s.mean_ecd_um) + " µm " + ci(s.mean_ecd_ci95_um)], ["CI from", s.basis || "–"]], null);
    $("efile").textContent = "(" + f.edit_file + ")";
    var ol = $("elist"); ol.textContent = "";
    f.edit_list.forEach(function (e, i) {
      var li = document.createElement("li");
      li.textContent = e.op + (f.effects[i] ? " — " + f.effects[i].replace(/^[a-z_]+: /, "") : "");
      ol.appendChild(li);
    });
    $("undo").disabled = !f.edit_list.length; $("redo").disabled = !f.redo;
    drawMarks();
  }
  function table(t, rows, prev) {
    t.textContent = "";
    rows.forEach(function (r) {
      var tr = document.createElement("tr"), a = document.createElement("td"), b = document.createElement("td");
      a.textContent = r[0]; b.textContent = r[1]; b.className = "v";
      if (r[2]) { b.dataset.key = r[2]; }
      if (prev && r[2] && S.field && prev[r[2]] !== S.field.numbers[r[2]]) { b.className = "v changed"; }
      tr.appendChild(a); tr.appendChild(b); t.appendChild(tr);
    });
  }

  /* ---- tools --------------------------------------------------------------------- */
  function buildTools(kind) {
    var T = $("tools"); T.textContent = "";
    TOOLS[kind].forEach(function (t, i) {
      var b = document.createElement("button"); b.textContent = t[1]; b.title = t[2] + " (" + (i + 1) + ")";
      b.dataset.tool = t[0]; b.id = "tool-" + t[0];
      b.addEventListener("click", function () { setTool(t[0]); });
      T.appendChild(b);
    });
    setTool(S.tool && TOOLS[kind].some(function (t) { return t[0] === S.tool; }) ? S.tool : "pan");
  }
  function setTool(name) {
    S.tool = name; S.pts = []; S.drawing = false;
    Array.prototype.forEach.call(document.querySelectorAll("#tools button"), function (b) {
      b.className = b.dataset.tool === name ? "on" : "";
    });
    var t = (TOOLS[S.field ? S.field.kind : "grains"].filter(function (x) { return x[0] === name; })[0] || [])[2];
    $("hint").textContent = t || "";
    viewer.className = name === "pan" ? "pan" : "";
    drawMarks();
  }
  function send(edit) {
    var f = S.field; S.pts = []; S.drawing = false; drawMarks();
    say("measuring…");
    var t0 = performance.now();
    return api("api/field/" + f.id + "/edit", { edit: edit }).then(function (j) {
      S.field = j; showField(j); say("measured again in " + ((performance.now() - t0) / 1000).toFixed(2) + " s");
      return loadList();
    }).catch(function (e) { say(e.message, true); drawMarks(); });
  }
  function post(what, body) {
    var f = S.field; if (!f) { return Promise.resolve(); }
    return api("api/field/" + f.id + "/" + what, body || {}).then(function (j) {
      S.field = j; showField(j); say(""); return loadList();
    }).catch(function (e) { say(e.message, true); });
  }

  /* ---- view: zoom and pan -------------------------------------------------------- */
  function apply() {
    stage.style.transform = "translate(" + S.tx + "px," + S.ty + "px) scale(" + S.scale + ")";
    stage.className = S.scale >= 2 ? "px" : "";
  }
  function fit() {
    if (!S.field) { return; }
    var w = S.field.shape_px[1], h = S.field.shape_px[0], r = viewer.getBoundingClientRect();
    S.scale = Math.min(r.width / w, r.height / h) || 1;
    S.tx = (r.width - w * S.scale) / 2; S.ty = (r.height - h * S.scale) / 2; apply();
  }
  function zoomAt(cx, cy, k) {
    var s = Math.max(0.02, Math.min(40, S.scale * k)); k = s / S.scale;
    S.tx = cx - (cx - S.tx) * k; S.ty = cy - (cy - S.ty) * k; S.scale = s; apply();
  }
  function toImage(ev) {
    var r = viewer.getBoundingClientRect();
    return [(ev.clientX - r.left - S.tx) / S.scale, (ev.clientY - r.top - S.ty) / S.scale];
  }
  /* screen (client) coordinates of image pixel (x, y): used by the browser test */
  S.toScreen = function (x, y) {
    var r = viewer.getBoundingClientRect();
    return [r.left + S.tx + x * S.scale, r.top + S.ty + y * S.scale];
  };
  viewer.addEventListener("wheel", function (ev) {
    ev.preventDefault();
    var r = viewer.getBoundingClientRect();
    zoomAt(ev.clientX - r.left, ev.clientY - r.top, Math.exp(-ev.deltaY * (ev.deltaMode ? 0.05 : 0.0015)));
  }, { passive: false });
  viewer.addEventListener("mousedown", function (ev) {
    if (!S.field) { return; }
    viewer.focus();
    if (ev.button === 1 || ev.button === 2 || S.tool === "pan" || ev.shiftKey) {
      S.dragging = [ev.clientX, ev.clientY, S.tx, S.ty]; ev.preventDefault(); return;
    }
    if (ev.button !== 0) { return; }
    var p = round(toImage(ev));
    if (!inside(p)) { return; }
    if (S.tool === "cut" || S.tool === "split") { S.drawing = true; S.pts = [p]; drawMarks(); }
  });
  window.addEventListener("mousemove", function (ev) {
    if (S.dragging) {
      S.tx = S.dragging[2] + ev.clientX - S.dragging[0]; S.ty = S.dragging[3] + ev.clientY - S.dragging[1]; apply();
      return;
    }
    if (S.drawing) {
      var p = clamp(round(toImage(ev))), q = S.pts[S.pts.length - 1];
      if (Math.hypot(p[0] - q[0], p[1] - q[1]) * S.scale >= 3) { S.pts.push(p); drawMarks(); }
    }
  });
  window.addEventListener("mouseup", function (ev) {
    if (S.dragging) { S.dragging = null; return; }
    if (S.drawing) {
      S.drawing = false;
      var p = clamp(round(toImage(ev))); S.pts.push(p);
      if (S.pts.length >= 2) { send({ op: S.tool, line: S.pts }); } else { S.pts = []; drawMarks(); }
    }
  });
  viewer.addEventListener("contextmenu", function (ev) { ev.preventDefault(); });
  viewer.addEventListener("click", function (ev) {
    if (!S.field || ev.button !== 0 || ev.shiftKey) { return; }
    var p = round(toImage(ev));
    if (!inside(p)) { return; }
    var t = S.tool;
    if (t === "join" || t === "twin" || t === "grain_boundary") {
      S.pts.push(p); drawMarks();
      if (S.pts.length === 2) { send({ op: t, points: S.pts }); }
    } else if (t === "delete") {
      send({ op: "delete", point: p });
    } else if (t === "exclude" || t === "add") {
      if (S.pts.length >= 3) {
        var q = S.pts[0];
        if (Math.hypot(p[0] - q[0], p[1] - q[1]) * S.scale < 8) { closePolygon(); return; }
      }
      S.pts.push(p); drawMarks();
    }
  });
  viewer.addEventListener("dblclick", function (ev) { ev.preventDefault(); closePolygon(); });
  function closePolygon() {
    if ((S.tool === "exclude" || S.tool === "add") && S.pts.length >= 3) {
      var pts = dedupe(S.pts);
      if (pts.length >= 3) { send({ op: S.tool, polygon: pts }); }
    }
  }
  function dedupe(pts) {
    return pts.filter(function (p, i) { return i === 0 || p[0] !== pts[i - 1][0] || p[1] !== pts[i - 1][1]; });
  }
  function round(p) { return [Math.round(p[0] * 10) / 10, Math.round(p[1] * 10) / 10]; }
  function inside(p) {
    return p[0] >= 0 && p[1] >= 0 && p[0] < S.field.shape_px[1] && p[1] < S.field.shape_px[0];
  }
  function clamp(p) {
    return [Math.max(0, Math.min(S.field.shape_px[1] - 0.01, p[0])),
            Math.max(0, Math.min(S.field.shape_px[0] - 0.01, p[1]))];
  }
  document.addEventListener("keydown", function (ev) {
    if (ev.target.tagName === "INPUT") { return; }
    if ((ev.ctrlKey || ev.metaKey) && ev.key.toLowerCase() === "z") { ev.preventDefault(); post(ev.shiftKey ? "redo" : "undo"); return; }
    if ((ev.ctrlKey || ev.metaKey) && ev.key.toLowerCase() === "y") { ev.preventDefault(); post("redo"); return; }
    if (ev.key === "Escape") { S.pts = []; S.drawing = false; drawMarks(); return; }
    if (ev.key === "Enter") { closePolygon(); return; }
    if (ev.key === "f" || ev.key === "F") { fit(); return; }
    if (!S.field) { return; }
    var k = parseInt(ev.key, 10), tl = TOOLS[S.field.kind];
    if (k >= 1 && k <= tl.length) { setTool(tl[k - 1][0]); }
  });

  /* ---- marks: the stored edits and the one being drawn ----------------------------- */
  function el(name, attrs) {
    var e = document.createElementNS(SVG, name);
    Object.keys(attrs).forEach(function (k) { e.setAttribute(k, attrs[k]); });
    marks.appendChild(e); return e;
  }
  function ptsAttr(pts) { return pts.map(function (p) { return p[0] + "," + p[1]; }).join(" "); }
  var COLOURS = { join: "#3ddc84", cut: "#ff3fb4", split: "#ff3fb4", exclude: "#ff4d4d", twin: "#38d6ff",
                  grain_boundary: "#ffb000", "delete": "#ff4d4d", add: "#3ddc84" };
  function drawMarks() {
    while (marks.firstChild) { marks.removeChild(marks.firstChild); }
    if (!S.field) { return; }
    var r = 5 / S.scale;
    S.field.edit_list.forEach(function (e) { drawEdit(e, r, false); });
    if (S.pts.length) { drawEdit({ op: S.tool, points: S.pts, line: S.pts, polygon: S.pts }, r, true); }
  }
  function drawEdit(e, r, live) {
    var c = COLOURS[e.op] || "#fff", w = live ? 2 : 1.5;
    if (e.op === "join" || e.op === "twin" || e.op === "grain_boundary") {
      var p = e.points;
      if (p.length === 2) {
        el("line", { x1: p[0][0], y1: p[0][1], x2: p[1][0], y2: p[1][1], stroke: c, "stroke-width": w,
                     "stroke-dasharray": e.op === "join" ? "" : "6 4" });
      }
      p.forEach(function (q) { el("circle", { cx: q[0], cy: q[1], r: r, fill: "none", stroke: c, "stroke-width": w }); });
    } else if (e.op === "cut" || e.op === "split") {
      el("polyline", { points: ptsAttr(e.line), fill: "none", stroke: c, "stroke-width": w });
    } else if (e.op === "exclude" || e.op === "add") {
      el(live ? "polyline" : "polygon", { points: ptsAttr(e.polygon), fill: live ? "none" : (e.op === "exclude" ? "rgba(255,60,60,.18)" : "rgba(60,220,130,.18)"),
                                           stroke: c, "stroke-width": w });
    } else if (e.op === "delete") {
      var q = e.point;
      el("path", { d: "M" + (q[0] - r) + "," + (q[1] - r) + "L" + (q[0] + r) + "," + (q[1] + r) +
                      "M" + (q[0] - r) + "," + (q[1] + r) + "L" + (q[0] + r) + "," + (q[1] - r), stroke: c, "stroke-width": w });
    }
  }
  viewer.addEventListener("wheel", function () { drawMarks(); }, { passive: true });

  /* ---- buttons ------------------------------------------------------------------- */
  $("undo").addEventListener("click", function () { post("undo"); });
  $("redo").addEventListener("click", function () { post("redo"); });
  $("reviewed").addEventListener("click", function () { post("status", { status: "reviewed" }); });
  $("clearstatus").addEventListener("click", function () { post("status", { status: null }); });
  $("reject").addEventListener("click", function () {
    var why = window.prompt("Why is this field rejected? (it leaves the specimen statistics)", "");
    if (why) { post("status", { status: "rejected", reason: why }); }
  });
  $("fit").addEventListener("click", fit);
  $("one").addEventListener("click", function () {
    var r = viewer.getBoundingClientRect(); zoomAt(r.width / 2, r.height / 2, 1 / S.scale); drawMarks();
  });
  window.addEventListener("resize", function () { if (S.field) { fit(); } });

  loadList().then(function () {
    var first = S.fields.groups.length && S.fields.groups[0].fields[0];
    var want = parseInt(new URLSearchParams(location.search).get("field"), 10);
    if (!isNaN(want)) { return openField(want); }
    if (first) { return openField(first.id); }
  }).catch(function (e) { say(e.message, true); });
})();
