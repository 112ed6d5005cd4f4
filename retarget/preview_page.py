"""The preview page: HTML, CSS and a small canvas-2D viewer in plain JavaScript, all inline.

render_page(title_html, data_json) fills in the escaped title and the JSON data (see retarget.preview for
its layout). The page loads nothing from anywhere: no network, no external script, style sheet or font.
It reads a URL hash such as #frame=10&play=0&yaw=30&pitch=12&dist=5&follow=1&panel=0&speed=0.5.
"""

from __future__ import annotations

__all__ = ["render_page"]


def render_page(title_html: str, data_json: str) -> str:
    """The whole page; ``title_html`` must already be HTML-escaped, ``data_json`` safe inside <script>."""
    before, after = _PAGE.split("%%DATA%%")
    return before.replace("%%TITLE%%", title_html) + data_json + after.replace("%%TITLE%%", title_html)


_PAGE = r"""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="retarget preview">
<title>%%TITLE%%</title>
<style>
:root {
  --bg: #0f1318; --bg2: #161b22; --line: #262d37; --text: #d9dfe7; --dim: #8a96a6;
  --left: #f2a93b; --right: #3cc4cc; --centre: #e6eaef; --contact: #8ee06a; --accent: #f2a93b;
}
* { box-sizing: border-box; }
html, body { margin: 0; height: 100%; background: var(--bg); color: var(--text);
  font: 13px/1.4 system-ui, -apple-system, "Segoe UI", Roboto, "DejaVu Sans", sans-serif; }
#app { display: grid; height: 100vh; grid-template-columns: 1fr auto; grid-template-rows: auto 1fr auto; }
header { grid-column: 1 / 3; display: flex; align-items: baseline; gap: 14px; padding: 8px 14px;
  background: var(--bg2); border-bottom: 1px solid var(--line); }
header h1 { margin: 0; font-size: 15px; font-weight: 600; letter-spacing: .01em; white-space: nowrap;
  overflow: hidden; text-overflow: ellipsis; }
header .sub { color: var(--dim); font-size: 12px; white-space: nowrap; }
#stage { position: relative; min-width: 0; min-height: 0; overflow: hidden; cursor: grab; touch-action: none; }
#stage.dragging { cursor: grabbing; }
#view { position: absolute; inset: 0; width: 100%; height: 100%; display: block; }
#panel { grid-row: 2 / 4; grid-column: 2; width: 280px; overflow-y: auto; background: var(--bg2);
  border-left: 1px solid var(--line); padding: 10px 14px 16px; }
#panel.hidden { display: none; }
#panel h2 { font-size: 11px; text-transform: uppercase; letter-spacing: .09em; color: var(--dim);
  margin: 14px 0 6px; font-weight: 600; }
#panel h2:first-child { margin-top: 2px; }
#panel h3 { font-size: 12px; margin: 8px 0 3px; font-weight: 600; color: var(--text); }
#panel table { width: 100%; border-collapse: collapse; }
#panel td { padding: 2px 0; vertical-align: top; }
#panel td:first-child { color: var(--dim); padding-right: 8px; }
#panel td:last-child { text-align: right; font-variant-numeric: tabular-nums; word-break: break-word; }
#panel .nest { padding-left: 8px; border-left: 2px solid var(--line); margin: 2px 0 6px; }
.keyrow { display: flex; flex-wrap: wrap; gap: 6px 12px; color: var(--dim); font-size: 12px; }
.chip { display: inline-block; width: 10px; height: 10px; border-radius: 2px; margin-right: 5px;
  vertical-align: -1px; }
.hint { color: var(--dim); font-size: 11.5px; margin-top: 14px; line-height: 1.6; }
footer { grid-column: 1; display: flex; align-items: center; gap: 12px; padding: 7px 12px;
  background: var(--bg2); border-top: 1px solid var(--line); }
button, select { background: #222a34; color: var(--text); border: 1px solid #333d4a; border-radius: 5px;
  font: inherit; padding: 4px 9px; cursor: pointer; }
button:hover, select:hover { border-color: #4a5666; }
#play { width: 36px; height: 30px; padding: 0; display: grid; place-items: center; }
#play svg { width: 14px; height: 14px; fill: var(--text); }
#scrub { flex: 1; min-width: 120px; display: flex; flex-direction: column; gap: 2px; }
#lanes { width: 100%; height: 0; display: block; }
#frame { width: 100%; margin: 0; accent-color: var(--accent); }
#clock { font-variant-numeric: tabular-nums; color: var(--dim); white-space: nowrap; min-width: 128px; }
label.opt { color: var(--dim); white-space: nowrap; display: flex; align-items: center; gap: 5px; }
</style>
</head>
<body>
<div id="app">
  <header><h1>%%TITLE%%</h1><span class="sub" id="sub"></span></header>
  <div id="stage"><canvas id="view"></canvas></div>
  <aside id="panel"></aside>
  <footer>
    <button id="play" title="Play / pause (space)" aria-label="play or pause"><svg viewBox="0 0 14 14"></svg></button>
    <div id="scrub"><canvas id="lanes"></canvas><input id="frame" type="range" min="0" max="0" value="0" step="1" aria-label="frame"></div>
    <span id="clock"></span>
    <label class="opt">speed <select id="speed">
      <option value="0.1">0.1&times;</option><option value="0.25">0.25&times;</option>
      <option value="0.5">0.5&times;</option><option value="1" selected>1&times;</option>
      <option value="2">2&times;</option></select></label>
    <label class="opt"><input id="follow" type="checkbox" checked> follow</label>
    <button id="reset" title="Reset the camera (double-click the view)">reset view</button>
    <button id="panelbtn" title="Show or hide the numbers">numbers</button>
  </footer>
</div>
<script id="retarget-data" type="application/json">%%DATA%%</script>
<script>
(function () {
  "use strict";
  var D = JSON.parse(document.getElementById("retarget-data").textContent);
  var css = getComputedStyle(document.documentElement);
  function cssv(n) { return css.getPropertyValue(n).trim(); }
  var COL = { left: cssv("--left"), right: cssv("--right"), centre: cssv("--centre"), contact: cssv("--contact") };
  var BG = [15, 19, 24];

  // ----- data ------------------------------------------------------------------------------------
  function bytes(b64) {
    var s = atob(b64), n = s.length, u = new Uint8Array(n);
    for (var i = 0; i < n; i++) u[i] = s.charCodeAt(i);
    return new DataView(u.buffer);
  }
  function decode(S) {
    var F = S.frames, P = S.parents.length, step = S.step, o = S.origin;
    var rel = bytes(S.points), root = bytes(S.root);
    var pos = new Float32Array(F * P * 3);
    for (var f = 0; f < F; f++) {
      var r0 = root.getInt32(12 * f, true), r1 = root.getInt32(12 * f + 4, true), r2 = root.getInt32(12 * f + 8, true);
      for (var p = 0; p < P; p++) {
        var i = (f * P + p) * 3;
        pos[i] = o[0] + (r0 + rel.getInt16(2 * i, true)) * step;
        pos[i + 1] = o[1] + (r1 + rel.getInt16(2 * i + 2, true)) * step;
        pos[i + 2] = o[2] + (r2 + rel.getInt16(2 * i + 4, true)) * step;
      }
    }
    S.pos = pos; S.P = P;
    var isFoot = {};
    Object.keys(S.feet).forEach(function (k) { S.feet[k].forEach(function (q) { isFoot[q] = k; }); });
    S.footOf = isFoot;
    var nj = S.joints.length;
    S.headTip = -1;
    if (S.head !== null) S.tip_of.forEach(function (t, k) { if (t === S.head) S.headTip = nj + k; });
    // Root path on the ground, thinned to at most 1500 points.
    var every = Math.max(1, Math.ceil(F / 1500)), trail = [];
    var a3 = 3 * S.anchor;
    for (f = 0; f < F; f += every) trail.push([pos[f * P * 3 + a3], pos[f * P * 3 + a3 + 2]]);
    S.isLoose = {};
    S.loose.forEach(function (q) { S.isLoose[q] = true; });
    S.trail = trail;
    var minx = Infinity, maxx = -Infinity, minz = Infinity, maxz = -Infinity;
    trail.forEach(function (q) { minx = Math.min(minx, q[0]); maxx = Math.max(maxx, q[0]);
      minz = Math.min(minz, q[1]); maxz = Math.max(maxz, q[1]); });
    S.centre = [(minx + maxx) / 2, (minz + maxz) / 2];
    S.extent = Math.sqrt((maxx - minx) * (maxx - minx) + (maxz - minz) * (maxz - minz));
    return S;
  }
  var sides = D.sides.map(decode);
  var src = sides[0], tgt = sides[1], F = src.frames;
  var tgtFrame = new Int32Array(F);
  for (var f = 0; f < F; f++) tgtFrame[f] = Math.min(tgt.frames - 1, Math.max(0, Math.round(f / src.fps * tgt.fps)));
  var contacts = D.contacts.map(function (c) {
    var on = new Uint8Array(F);
    c.runs.forEach(function (r) { for (var i = r[0]; i < r[1]; i++) on[i] = 1; });
    return { key: c.key, feet: [c.source, c.target], on: on, runs: c.runs };
  });
  var Hmax = Math.max(src.height, tgt.height), extent = Math.max(src.extent, tgt.extent);

  // ----- state -----------------------------------------------------------------------------------
  var DEG = Math.PI / 180;
  var HOME = { yaw: 35 * DEG, pitch: 14 * DEG, dist: 1.9 * Hmax + 0.9 };
  var cam = { yaw: HOME.yaw, pitch: HOME.pitch, dist: HOME.dist };
  var state = { frame: 0, playing: true, speed: 1, follow: true, acc: 0, last: null, dirty: true };

  var el = function (id) { return document.getElementById(id); };
  var canvas = el("view"), ctx = canvas.getContext("2d"), stage = el("stage");
  var lanes = el("lanes"), lctx = lanes.getContext("2d");
  var slider = el("frame"), clock = el("clock"), panel = el("panel");
  slider.max = String(F - 1);
  el("sub").textContent = src.joints.length + " joints \u2192 " + tgt.joints.length + " joints \u00b7 " +
    F + " frames at " + (+src.fps.toPrecision(4)) + " fps";

  // ----- camera ----------------------------------------------------------------------------------
  function makeView(focus, x0, w, h) {
    // Without following, the camera backs off so the whole path fits.
    var dist = cam.dist + (state.follow ? 0 : 0.9 * extent);
    var cy = Math.cos(cam.yaw), sy = Math.sin(cam.yaw), cp = Math.cos(cam.pitch), sp = Math.sin(cam.pitch);
    var back = [sy * cp, sp, cy * cp];
    var eye = [focus[0] + dist * back[0], focus[1] + dist * back[1], focus[2] + dist * back[2]];
    var fw = [-back[0], -back[1], -back[2]];
    var r = [cy, 0, -sy];
    var u = [r[1] * fw[2] - r[2] * fw[1], r[2] * fw[0] - r[0] * fw[2], r[0] * fw[1] - r[1] * fw[0]];
    var foc = 0.5 * Math.min(w, h * 1.15) / Math.tan(19 * DEG);
    return {
      x0: x0, w: w, h: h, dist: dist, eye: eye, r: r, u: u, fw: fw, foc: foc, cx: x0 + w / 2, cy: h * 0.52, near: 0.05,
      cam: function (x, y, z) {
        var dx = x - eye[0], dy = y - eye[1], dz = z - eye[2];
        return [dx * r[0] + dy * r[1] + dz * r[2], dx * u[0] + dy * u[1] + dz * u[2], dx * fw[0] + dy * fw[1] + dz * fw[2]];
      },
      scr: function (c) { return [this.cx + this.foc * c[0] / c[2], this.cy - this.foc * c[1] / c[2]]; }
    };
  }
  // Clip a camera-space segment at the near plane; null when wholly behind it.
  function clipSeg(V, a, b) {
    var n = V.near;
    if (a[2] < n && b[2] < n) return null;
    if (a[2] < n || b[2] < n) {
      var t = (n - a[2]) / (b[2] - a[2]);
      var m = [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1]), n];
      if (a[2] < n) a = m; else b = m;
    }
    return [V.scr(a), V.scr(b)];
  }
  function shade(hex, k) {  // mix a colour towards the background by k in [0, 1]
    var n = parseInt(hex.slice(1), 16), c = [(n >> 16) & 255, (n >> 8) & 255, n & 255];
    return "rgb(" + c.map(function (v, i) { return Math.round(v + (BG[i] - v) * k); }).join(",") + ")";
  }
  function rgba(hex, a) {
    var n = parseInt(hex.slice(1), 16);
    return "rgba(" + ((n >> 16) & 255) + "," + ((n >> 8) & 255) + "," + (n & 255) + "," + a + ")";
  }

  // ----- drawing ---------------------------------------------------------------------------------
  function pt(S, f, p) { var i = (f * S.P + p) * 3; return [S.pos[i], S.pos[i + 1], S.pos[i + 2]]; }

  function drawGrid(V, g, focus) {
    var R = Math.max(9, 1.5 * V.dist), s = R > 16 ? 1 : 0.5;
    R = Math.ceil(R / s) * s;
    var cxg = Math.round(focus[0] / s) * s, czg = Math.round(focus[2] / s) * s;
    var levels = 6, paths = [];
    for (var i = 0; i < 2 * levels; i++) paths.push(new Path2D());
    function seg(x1, z1, x2, z2, major) {
      var mx = (x1 + x2) / 2 - focus[0], mz = (z1 + z2) / 2 - focus[2];
      var fade = 1 - Math.sqrt(mx * mx + mz * mz) / R;
      if (fade <= 0) return;
      var q = clipSeg(V, V.cam(x1, g, z1), V.cam(x2, g, z2));
      if (!q) return;
      var path = paths[(major ? levels : 0) + Math.min(levels - 1, Math.floor(fade * levels))];
      path.moveTo(q[0][0], q[0][1]); path.lineTo(q[1][0], q[1][1]);
    }
    for (var k = -R / s; k <= R / s; k++) {
      var x = cxg + k * s, z = czg + k * s;
      var majorX = Math.abs(x - Math.round(x)) < 1e-6, majorZ = Math.abs(z - Math.round(z)) < 1e-6;
      for (var m = -R / s; m < R / s; m++) {
        seg(x, czg + m * s, x, czg + (m + 1) * s, majorX);
        seg(cxg + m * s, z, cxg + (m + 1) * s, z, majorZ);
      }
    }
    ctx.lineWidth = 1;
    for (i = 0; i < 2 * levels; i++) {
      var lvl = (i % levels + 0.5) / levels, major = i >= levels;
      ctx.strokeStyle = "rgba(140,160,185," + (lvl * (major ? 0.38 : 0.16)).toFixed(3) + ")";
      ctx.stroke(paths[i]);
    }
  }

  function drawTrail(V, S, g) {
    var path = new Path2D(), prev = null;
    for (var i = 0; i < S.trail.length; i++) {
      var c = V.cam(S.trail[i][0], g, S.trail[i][1]);
      if (prev) {
        var q = clipSeg(V, prev, c);
        if (q) { path.moveTo(q[0][0], q[0][1]); path.lineTo(q[1][0], q[1][1]); }
      }
      prev = c;
    }
    ctx.strokeStyle = "rgba(242,169,59,0.22)"; ctx.lineWidth = 1.5; ctx.setLineDash([4, 5]);
    ctx.stroke(path); ctx.setLineDash([]);
  }

  function disc(V, x, y, z, rad, n) {
    var path = new Path2D(), ok = true;
    for (var i = 0; i <= n; i++) {
      var a = 2 * Math.PI * i / n, c = V.cam(x + rad * Math.cos(a), y, z + rad * Math.sin(a));
      if (c[2] < V.near) { ok = false; break; }
      var s = V.scr(c);
      if (i === 0) path.moveTo(s[0], s[1]); else path.lineTo(s[0], s[1]);
    }
    return ok ? path : null;
  }

  function drawFigure(V, S, f, g, which, hot) {
    var P = S.P, camp = new Array(P), wpos = new Array(P);
    for (var p = 0; p < P; p++) { wpos[p] = pt(S, f, p); camp[p] = V.cam(wpos[p][0], wpos[p][1], wpos[p][2]); }
    var unit = S.height / 1.75;
    // Shadow on the ground.
    var sh = new Path2D();
    for (p = 0; p < P; p++) {
      var par = S.parents[p];
      if (par < 0 || S.isLoose[p]) continue;
      var q = clipSeg(V, V.cam(wpos[par][0], g, wpos[par][2]), V.cam(wpos[p][0], g, wpos[p][2]));
      if (q) { sh.moveTo(q[0][0], q[0][1]); sh.lineTo(q[1][0], q[1][1]); }
    }
    ctx.strokeStyle = "rgba(0,0,0,0.38)"; ctx.lineCap = "round";
    ctx.lineWidth = Math.max(1.5, V.foc * 0.045 * unit / V.dist); ctx.stroke(sh);
    // Contact markers on the ground under planted feet.
    Object.keys(hot).forEach(function (foot) {
      var pts = S.feet[foot]; if (!pts) return;
      var x = 0, z = 0;
      pts.forEach(function (q) { x += wpos[q][0]; z += wpos[q][2]; });
      var path = disc(V, x / pts.length, g + 0.002, z / pts.length, 0.13 * unit, 28);
      if (!path) return;
      ctx.fillStyle = rgba(COL.contact, 0.22); ctx.fill(path);
      ctx.strokeStyle = rgba(COL.contact, 0.95); ctx.lineWidth = 2; ctx.stroke(path);
    });
    // Bones, joints and head, far to near.
    var items = [];
    for (p = 0; p < P; p++) {
      par = S.parents[p];
      if (par >= 0 && p !== S.headTip) items.push({ z: (camp[p][2] + camp[par][2]) / 2, bone: true, a: par, b: p });
      if (p < S.joints.length && camp[p][2] > V.near) items.push({ z: camp[p][2] - 0.02, bone: false, a: p });
    }
    var head = null;
    if (S.head !== null) {
      var hc = S.headTip >= 0 ? [(wpos[S.head][0] + wpos[S.headTip][0]) / 2, (wpos[S.head][1] + wpos[S.headTip][1]) / 2,
        (wpos[S.head][2] + wpos[S.headTip][2]) / 2] : wpos[S.head];
      head = V.cam(hc[0], hc[1], hc[2]);
      if (head[2] > V.near) items.push({ z: head[2], head: true });
    }
    items.sort(function (a, b) { return b.z - a.z; });
    function fade(z) { return Math.min(0.55, Math.max(0, (z - V.dist) / (3 * Hmax + 2))); }
    for (var i = 0; i < items.length; i++) {
      var it = items[i];
      if (it.head) {
        var rad = V.foc * 0.1 * unit / head[2], sp = V.scr(head);
        ctx.beginPath(); ctx.arc(sp[0], sp[1], rad, 0, 2 * Math.PI);
        ctx.fillStyle = shade(COL.centre, 0.35 + fade(head[2])); ctx.fill();
        ctx.lineWidth = 2; ctx.strokeStyle = shade(COL.centre, fade(head[2])); ctx.stroke();
        continue;
      }
      var colour = COL[S.side[it.bone ? it.b : it.a]] || COL.centre;
      if (it.bone) {
        q = clipSeg(V, camp[it.a], camp[it.b]);
        if (!q) continue;
        if (S.isLoose[it.b]) {  // not a rigid bone: an animated offset, drawn as a faint dashed link
          ctx.strokeStyle = "rgba(160,175,195,0.35)"; ctx.lineWidth = 1; ctx.setLineDash([3, 4]);
          ctx.beginPath(); ctx.moveTo(q[0][0], q[0][1]); ctx.lineTo(q[1][0], q[1][1]); ctx.stroke();
          ctx.setLineDash([]);
          continue;
        }
        var lw = Math.min(16, Math.max(1.5, V.foc * 0.034 * unit / Math.max(it.z, V.near)));
        var planted = hot[S.footOf[it.b]] && S.footOf[it.a] !== undefined;
        ctx.strokeStyle = shade(planted ? COL.contact : colour, fade(it.z));
        ctx.lineWidth = lw; ctx.lineCap = "round";
        ctx.beginPath(); ctx.moveTo(q[0][0], q[0][1]); ctx.lineTo(q[1][0], q[1][1]); ctx.stroke();
      } else {
        var s = V.scr(camp[it.a]), jr = Math.min(8, Math.max(1.5, V.foc * 0.021 * unit / it.z));
        var hotJ = hot[S.footOf[it.a]];
        ctx.beginPath(); ctx.arc(s[0], s[1], jr, 0, 2 * Math.PI);
        ctx.fillStyle = hotJ ? COL.contact : "#10141a"; ctx.fill();
        ctx.lineWidth = Math.max(1, jr * 0.45); ctx.strokeStyle = shade(hotJ ? COL.contact : colour, fade(it.z));
        ctx.stroke();
      }
    }
  }

  function drawSide(which, x0, w, h) {
    var S = sides[which], f = which === 0 ? state.frame : tgtFrame[state.frame], g = S.ground;
    ctx.save();
    ctx.beginPath(); ctx.rect(x0, 0, w, h); ctx.clip();
    var grad = ctx.createLinearGradient(0, 0, 0, h);
    grad.addColorStop(0, "#1b212a"); grad.addColorStop(1, "#0c0f13");
    ctx.fillStyle = grad; ctx.fillRect(x0, 0, w, h);
    var root = pt(S, f, S.anchor);
    var fx = state.follow ? root[0] : S.centre[0], fz = state.follow ? root[2] : S.centre[1];
    var V = makeView([fx, g + 0.5 * Hmax, fz], x0, w, h);
    drawGrid(V, g, [fx, g, fz]);
    drawTrail(V, S, g);
    var hot = {};
    contacts.forEach(function (c) { var foot = c.feet[which]; if (foot && c.on[state.frame]) hot[foot] = true; });
    drawFigure(V, S, f, g, which, hot);
    // Labels.
    ctx.textBaseline = "top"; ctx.font = "600 11px system-ui, sans-serif";
    var tag = which === 0 ? "SOURCE" : "RETARGETED";
    ctx.fillStyle = which === 0 ? "#9fb0c4" : COL.left;
    ctx.fillText(tag, x0 + 14, 12);
    var tw = ctx.measureText(tag).width;
    ctx.font = "12px system-ui, sans-serif"; ctx.fillStyle = "#c9d1db";
    ctx.fillText((S.file || S.label) + "  \u00b7  " + S.joints.length + " joints", x0 + 22 + tw, 11.5);
    ctx.fillStyle = "#8a96a6"; ctx.textBaseline = "bottom";
    ctx.fillText("frame " + f + " / " + (S.frames - 1) + "   " + (f / S.fps).toFixed(2) + " s", x0 + 14, h - 10);
    ctx.restore();
  }

  function drawLanes() {
    var w = lanes.clientWidth, n = contacts.length;
    if (!n || !w) return;
    var dpr = window.devicePixelRatio || 1, rowH = 5, gap = 2, h = n * (rowH + gap);
    if (lanes.width !== Math.round(w * dpr) || lanes.height !== Math.round(h * dpr)) {
      lanes.style.height = h + "px"; lanes.width = Math.round(w * dpr); lanes.height = Math.round(h * dpr);
    }
    lctx.setTransform(dpr, 0, 0, dpr, 0, 0); lctx.clearRect(0, 0, w, h);
    var pad = 8, span = w - 2 * pad;  // the range input's thumb keeps about this margin
    contacts.forEach(function (c, k) {
      var y = k * (rowH + gap);
      lctx.fillStyle = "#222a34"; lctx.fillRect(pad, y, span, rowH);
      lctx.fillStyle = k % 2 ? shade(COL.contact, 0.25) : COL.contact;
      c.runs.forEach(function (r) { lctx.fillRect(pad + span * r[0] / F, y, Math.max(1, span * (r[1] - r[0]) / F), rowH); });
    });
    lctx.fillStyle = "#ffffff";
    lctx.fillRect(pad + span * state.frame / Math.max(1, F - 1) - 1, 0, 2, h);
  }

  function draw() {
    var w = stage.clientWidth, h = stage.clientHeight, dpr = window.devicePixelRatio || 1;
    if (canvas.width !== Math.round(w * dpr) || canvas.height !== Math.round(h * dpr)) {
      canvas.width = Math.round(w * dpr); canvas.height = Math.round(h * dpr);
    }
    ctx.setTransform(dpr, 0, 0, dpr, 0, 0);
    var half = Math.floor(w / 2);
    drawSide(0, 0, half, h);
    drawSide(1, half, w - half, h);
    ctx.fillStyle = "#2b333e"; ctx.fillRect(half - 1, 0, 2, h);
    drawLanes();
    slider.value = String(state.frame);
    clock.textContent = "frame " + state.frame + " / " + (F - 1) + " \u00b7 " + (state.frame / src.fps).toFixed(2) + " s";
    el("play").firstChild.innerHTML = state.playing ? '<rect x="2" y="1" width="3.6" height="12"/><rect x="8.4" y="1" width="3.6" height="12"/>'
      : '<path d="M3 1 L13 7 L3 13 Z"/>';
    state.dirty = false;
  }

  // ----- numbers panel ---------------------------------------------------------------------------
  function fmt(v) {
    if (v === null || v === undefined) return "\u2013";
    if (typeof v === "boolean") return v ? "yes" : "no";
    if (typeof v === "number") {
      if (Number.isInteger(v)) return String(v);
      var a = Math.abs(v);
      return a >= 1000 ? v.toFixed(0) : a >= 100 ? v.toFixed(1) : String(+v.toPrecision(3));
    }
    if (Array.isArray(v)) return v.map(fmt).join(", ");
    return String(v);
  }
  function label(k) { return String(k).replace(/_/g, " "); }
  function table(obj, into) {
    var t = document.createElement("table");
    Object.keys(obj).forEach(function (k) {
      var v = obj[k];
      if (v !== null && typeof v === "object" && !Array.isArray(v)) {
        var h3 = document.createElement("h3"); h3.textContent = label(k); into.appendChild(t); t = document.createElement("table");
        into.appendChild(h3);
        var box = document.createElement("div"); box.className = "nest"; table(v, box); into.appendChild(box);
        return;
      }
      var tr = t.insertRow(), a = tr.insertCell(), b = tr.insertCell();
      a.textContent = label(k); b.textContent = fmt(v);
    });
    into.appendChild(t);
  }
  function section(title, obj) {
    var h = document.createElement("h2"); h.textContent = title; panel.appendChild(h);
    table(obj, panel);
  }
  function buildPanel() {
    var key = document.createElement("div"); key.className = "keyrow";
    [["left side", COL.left], ["right side", COL.right], ["centre", COL.centre], ["foot contact", COL.contact]].forEach(function (k) {
      var s = document.createElement("span"), c = document.createElement("span");
      c.className = "chip"; c.style.background = k[1]; s.appendChild(c); s.appendChild(document.createTextNode(k[0]));
      key.appendChild(s);
    });
    var h = document.createElement("h2"); h.textContent = "Key"; panel.appendChild(h); panel.appendChild(key);
    section("Source", Object.assign({ file: src.file || "\u2013" }, src.facts));
    section("Retargeted", Object.assign({ file: tgt.file || "\u2013" }, tgt.facts));
    if (Object.keys(D.contact_numbers).length) section("Foot contacts", D.contact_numbers);
    if (Object.keys(D.numbers).length) section("Report", D.numbers);
    var hint = document.createElement("div"); hint.className = "hint";
    hint.innerHTML = "drag: orbit &middot; wheel: zoom &middot; double-click: reset<br>space: play / pause &middot; " +
      "&larr; &rarr;: step (shift: 10)<br>bright grid lines are 1 m apart";
    panel.appendChild(hint);
  }

  // ----- interaction -----------------------------------------------------------------------------
  function setFrame(n) {
    state.frame = Math.max(0, Math.min(F - 1, n | 0)); state.acc = state.frame; state.dirty = true;
  }
  function setPlaying(p) { state.playing = p; state.last = null; state.dirty = true; }
  function resetView() { cam.yaw = HOME.yaw; cam.pitch = HOME.pitch; cam.dist = HOME.dist; state.dirty = true; }
  function setPanel(show) { panel.classList.toggle("hidden", !show); state.dirty = true; }

  el("play").addEventListener("click", function () { setPlaying(!state.playing); this.blur(); });
  slider.addEventListener("input", function () { setPlaying(false); setFrame(+slider.value); });
  el("speed").addEventListener("change", function () { state.speed = +this.value; this.blur(); });
  el("follow").addEventListener("change", function () { state.follow = this.checked; state.dirty = true; this.blur(); });
  el("reset").addEventListener("click", function () { resetView(); this.blur(); });
  el("panelbtn").addEventListener("click", function () { setPanel(panel.classList.contains("hidden")); this.blur(); });
  lanes.addEventListener("click", function (e) {
    var r = lanes.getBoundingClientRect();
    setPlaying(false); setFrame(Math.round((e.clientX - r.left - 8) / (r.width - 16) * (F - 1)));
  });
  var drag = null;
  stage.addEventListener("pointerdown", function (e) {
    drag = { x: e.clientX, y: e.clientY }; stage.setPointerCapture(e.pointerId); stage.classList.add("dragging");
  });
  stage.addEventListener("pointermove", function (e) {
    if (!drag) return;
    cam.yaw -= (e.clientX - drag.x) * 0.008;
    cam.pitch = Math.max(-0.1, Math.min(1.5, cam.pitch + (e.clientY - drag.y) * 0.006));
    drag = { x: e.clientX, y: e.clientY }; state.dirty = true;
  });
  function endDrag() { drag = null; stage.classList.remove("dragging"); }
  stage.addEventListener("pointerup", endDrag);
  stage.addEventListener("pointercancel", endDrag);
  stage.addEventListener("dblclick", resetView);
  stage.addEventListener("wheel", function (e) {
    e.preventDefault();
    cam.dist = Math.max(0.6, Math.min(80, cam.dist * Math.exp(e.deltaY * 0.0012))); state.dirty = true;
  }, { passive: false });
  document.addEventListener("keydown", function (e) {
    if (e.target && e.target.tagName === "SELECT") return;
    if (e.key === " ") { e.preventDefault(); setPlaying(!state.playing); }
    else if (e.key === "ArrowRight" || e.key === "ArrowLeft") {
      e.preventDefault(); setPlaying(false);
      setFrame(state.frame + (e.key === "ArrowRight" ? 1 : -1) * (e.shiftKey ? 10 : 1));
    } else if (e.key === "Home") { setFrame(0); }
    else if (e.key === "End") { setFrame(F - 1); }
  });
  window.addEventListener("resize", function () { state.dirty = true; });

  function applyHash() {
    var h = {};
    location.hash.replace(/^#/, "").split("&").forEach(function (kv) {
      var i = kv.indexOf("="); if (i > 0) h[decodeURIComponent(kv.slice(0, i))] = decodeURIComponent(kv.slice(i + 1));
    });
    if (h.frame !== undefined && isFinite(+h.frame)) setFrame(+h.frame);
    if (h.play !== undefined) setPlaying(h.play !== "0");
    if (h.speed !== undefined && +h.speed > 0) { state.speed = +h.speed; }
    if (h.yaw !== undefined && isFinite(+h.yaw)) cam.yaw = +h.yaw * DEG;
    if (h.pitch !== undefined && isFinite(+h.pitch)) cam.pitch = Math.max(-0.1, Math.min(1.5, +h.pitch * DEG));
    if (h.dist !== undefined && +h.dist > 0) cam.dist = +h.dist;
    if (h.follow !== undefined) { state.follow = h.follow !== "0"; el("follow").checked = state.follow; }
    if (h.panel !== undefined) setPanel(h.panel !== "0");
    var sel = el("speed");
    for (var i = 0; i < sel.options.length; i++) if (+sel.options[i].value === state.speed) sel.selectedIndex = i;
    state.dirty = true;
  }
  window.addEventListener("hashchange", function () { applyHash(); draw(); });

  function tick(ts) {
    if (state.playing) {
      if (state.last !== null) {
        state.acc += (ts - state.last) / 1000 * src.fps * state.speed;
        if (state.acc >= F) state.acc %= F;
        var n = Math.floor(state.acc);
        if (n !== state.frame) { state.frame = n; state.dirty = true; }
      }
      state.last = ts;
    }
    if (state.dirty) draw();
    requestAnimationFrame(tick);
  }

  buildPanel();
  if (F < 2) setPlaying(false);
  applyHash();
  draw();
  requestAnimationFrame(tick);
})();
</script>
</body>
</html>
"""
