
(function () {
  "use strict";
  var source = document.getElementById("sx3d-data");
  var box = document.getElementById("sx3d-box");
  var canvas = document.getElementById("sx3d-canvas");
  var info = document.getElementById("sx3d-info");
  if (!source || !box || !canvas || !canvas.getContext) { return; }
  var ctx = canvas.getContext("2d");
  if (!ctx) { return; }
  var data = JSON.parse(source.textContent);
  var n = data.points.length;
  var flagged = {};
  data.flagged.forEach(function (i) { flagged[i] = true; });

  // Scale every point into the unit ball (the scores are centred on 0).
  var reach = 0, i, a;
  for (i = 0; i < n; i++) {
    var p = data.points[i];
    if (p[0] === null || p[1] === null || p[2] === null) { continue; }
    reach = Math.max(reach, Math.sqrt(p[0] * p[0] + p[1] * p[1] + p[2] * p[2]));
  }
  if (!(reach > 0)) { reach = 1; }
  var unit = data.points.map(function (p) {
    return (p[0] === null || p[1] === null || p[2] === null) ? null : [p[0] / reach, p[1] / reach, p[2] / reach];
  });

  var START_YAW = -0.55, START_PITCH = 0.35;
  var yaw = START_YAW, pitch = START_PITCH;
  var width = 0, height = 0, ratio = 1;
  var screen = new Array(n);
  var picked = -1, pending = false, drag = null;

  box.hidden = false;

  function fit() {
    var w = canvas.clientWidth || 640;
    var h = Math.round(Math.max(240, Math.min(w * 0.75, 560)));
    var r = window.devicePixelRatio || 1;
    if (w !== width || h !== height || r !== ratio) {
      width = w; height = h; ratio = r;
      canvas.style.height = h + "px";
      canvas.width = Math.round(w * r);
      canvas.height = Math.round(h * r);
    }
  }

  // PC1 to the right, PC2 up, PC3 towards the viewer; turn about the vertical
  // axis (yaw), then about the horizontal one (pitch); mild perspective.
  function project(u) {
    var cy = Math.cos(yaw), sy = Math.sin(yaw), cp = Math.cos(pitch), sp = Math.sin(pitch);
    var x = u[0] * cy + u[2] * sy;
    var z1 = -u[0] * sy + u[2] * cy;
    var y = u[1] * cp - z1 * sp;
    var z = u[1] * sp + z1 * cp;
    var scale = Math.min(width, height) * 0.39;
    var f = 6 / (6 - z);
    return [width / 2 + x * scale * f, height / 2 - y * scale * f, z];
  }

  function label(text, at) {
    ctx.font = "600 13px system-ui, sans-serif";
    var w = ctx.measureText(text).width;
    var left = at[0] < width / 2 - 4 ? at[0] - w : (at[0] > width / 2 + 4 ? at[0] : at[0] - w / 2);
    left = Math.max(4, Math.min(width - w - 4, left));
    var top = Math.max(10, Math.min(height - 10, at[1]));
    ctx.textBaseline = "middle";
    ctx.lineWidth = 4;
    ctx.strokeStyle = "rgba(255,255,255,0.9)";
    ctx.strokeText(text, left, top);
    ctx.fillStyle = "#1f2328";
    ctx.fillText(text, left, top);
  }

  function draw() {
    pending = false;
    fit();
    ctx.setTransform(ratio, 0, 0, ratio, 0, 0);
    ctx.globalAlpha = 1;
    ctx.fillStyle = "#ffffff";
    ctx.fillRect(0, 0, width, height);

    var axes = [[1, 0, 0], [0, 1, 0], [0, 0, 1]];
    ctx.lineWidth = 1;
    ctx.strokeStyle = "#8c959f";
    for (a = 0; a < 3; a++) {
      var e = axes[a];
      var from = project([-e[0], -e[1], -e[2]]), to = project(e);
      ctx.beginPath();
      ctx.moveTo(from[0], from[1]);
      ctx.lineTo(to[0], to[1]);
      ctx.stroke();
    }

    var order = [];
    for (i = 0; i < n; i++) {
      screen[i] = unit[i] ? project(unit[i]) : null;
      if (screen[i]) { order.push(i); }
    }
    order.sort(function (s, t) { return (screen[s][2] - screen[t][2]) || (s - t); });
    var radius = Math.max(2.5, Math.min(4.5, width / 180));
    for (var k = 0; k < order.length; k++) {
      i = order[k];
      var q = screen[i];
      var near = (q[2] + 1) / 2;
      ctx.globalAlpha = 0.55 + 0.45 * near;
      ctx.beginPath();
      ctx.arc(q[0], q[1], radius * (0.8 + 0.4 * near), 0, 2 * Math.PI);
      ctx.fillStyle = data.colours[data.value[i]];
      ctx.fill();
      ctx.lineWidth = flagged[i] ? 1.8 : 0.6;
      ctx.strokeStyle = flagged[i] ? "#000000" : "rgba(0,0,0,0.45)";
      ctx.stroke();
    }
    ctx.globalAlpha = 1;
    if (picked >= 0 && screen[picked]) {
      ctx.beginPath();
      ctx.arc(screen[picked][0], screen[picked][1], radius + 5, 0, 2 * Math.PI);
      ctx.lineWidth = 2;
      ctx.strokeStyle = "#1f2328";
      ctx.stroke();
    }
    for (a = 0; a < 3; a++) {
      var end = axes[a];
      label(data.axes[a], project([end[0] * 1.08, end[1] * 1.08, end[2] * 1.08]));
    }
    canvas.setAttribute("data-drawn", String(order.length));
    canvas.setAttribute("data-ready", "yes");
  }

  function redraw() {
    if (pending) { return; }
    pending = true;
    if (window.requestAnimationFrame) { window.requestAnimationFrame(draw); } else { setTimeout(draw, 16); }
  }

  function describe() {
    if (!info) { return; }
    if (picked < 0) { info.textContent = ""; return; }
    var p = data.points[picked];
    var text = data.labels[picked] || ("point " + (picked + 1));
    if (data.group !== null) { text += " \u00b7 " + data.group + ": " + data.values[data.value[picked]]; }
    text += " \u00b7 " + [0, 1, 2].map(function (a) {
      return data.axes[a].split(" ")[0] + " " + (p[a] === null ? "?" : Number(p[a]).toPrecision(4));
    }).join(", ");
    if (flagged[picked]) { text += " \u00b7 flagged"; }
    info.textContent = text;
  }

  function pick(x, y) {
    var best = -1, bestDistance = 64;
    for (var j = 0; j < n; j++) {
      var q = screen[j];
      if (!q) { continue; }
      var d = (q[0] - x) * (q[0] - x) + (q[1] - y) * (q[1] - y);
      if (d < bestDistance || (d === bestDistance && best >= 0 && q[2] > screen[best][2])) { best = j; bestDistance = d; }
    }
    if (best !== picked) { picked = best; describe(); redraw(); }
  }

  function at(e) {
    var rect = canvas.getBoundingClientRect();
    return [e.clientX - rect.left, e.clientY - rect.top];
  }
  function begin(xy) { drag = xy; canvas.style.cursor = "grabbing"; }
  function move(xy) {
    if (!drag) { return false; }
    yaw += (xy[0] - drag[0]) * 0.01;
    pitch = Math.max(-1.55, Math.min(1.55, pitch + (xy[1] - drag[1]) * 0.01));
    drag = xy;
    redraw();
    return true;
  }
  function stop() { drag = null; canvas.style.cursor = ""; }
  function reset() { yaw = START_YAW; pitch = START_PITCH; redraw(); }

  if (window.PointerEvent) {
    canvas.addEventListener("pointerdown", function (e) {
      var xy = at(e);
      pick(xy[0], xy[1]);
      begin(xy);
      try { canvas.setPointerCapture(e.pointerId); } catch (ignored) { /* not an active pointer */ }
      e.preventDefault();
    });
    canvas.addEventListener("pointermove", function (e) {
      var xy = at(e);
      if (!move(xy) && e.pointerType === "mouse") { pick(xy[0], xy[1]); }
    });
    canvas.addEventListener("pointerup", stop);
    canvas.addEventListener("pointercancel", stop);
  } else {
    canvas.addEventListener("mousedown", function (e) { var xy = at(e); pick(xy[0], xy[1]); begin(xy); e.preventDefault(); });
    window.addEventListener("mousemove", function (e) { var xy = at(e); if (!move(xy) && e.target === canvas) { pick(xy[0], xy[1]); } });
    window.addEventListener("mouseup", stop);
    canvas.addEventListener("touchstart", function (e) {
      if (e.touches.length !== 1) { return; }
      var xy = at(e.touches[0]);
      pick(xy[0], xy[1]);
      begin(xy);
      e.preventDefault();
    }, { passive: false });
    canvas.addEventListener("touchmove", function (e) {
      if (e.touches.length !== 1) { return; }
      move(at(e.touches[0]));
      e.preventDefault();
    }, { passive: false });
    canvas.addEventListener("touchend", stop);
    canvas.addEventListener("touchcancel", stop);
  }
  canvas.addEventListener("dblclick", reset);
  canvas.addEventListener("keydown", function (e) {
    var step = 0.1;
    if (e.key === "ArrowLeft") { yaw -= step; } else if (e.key === "ArrowRight") { yaw += step; }
    else if (e.key === "ArrowUp") { pitch = Math.max(-1.55, pitch - step); }
    else if (e.key === "ArrowDown") { pitch = Math.min(1.55, pitch + step); }
    else if (e.key === "0" || e.key === "Home") { reset(); e.preventDefault(); return; }
    else { return; }
    e.preventDefault();
    redraw();
  });
  window.addEventListener("resize", redraw);
  draw();
})();
