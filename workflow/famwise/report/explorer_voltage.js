/* famwise report explorer, voltage contrasts (points channel x time, no frequency axis).
   `famwiseVoltageViews(v, h)` is called by explorer.js with the explorer's model `v` and its
   helpers `h`; it draws the channel x time map and the time course of the selected channels,
   and binds their clicks and keys. Data layout: famwise/report/explorer.py. */
var famwiseVoltageViews = function (v, h) {
  "use strict";
  var d = v.d, C = v.C, T = v.T, state = v.state, TF = v.TF, root = v.root;
  var grid = v.tf, course = root.querySelector(".xp-course");
  var COURSE = {left: 62, top: 14, width: 470, height: 150};
  v.prepare(course);
  Object.keys(COURSE).forEach(function (key) { course.dataset[key] = COURSE[key]; });

  function cell(c, t) {
    var w = TF.width / T, r = TF.height / C;
    return [TF.left + t * w, TF.top + c * r, w, r];
  }
  function timeX(t) { return COURSE.left + (t + 0.5) * COURSE.width / T; }
  function valueY(value) { return COURSE.top + (1 - value / d.limit) / 2 * COURSE.height; }
  function significantAt(t) {
    var mask = v.correction().mask;
    return state.sel.some(function (c) { return mask[c * T + t] === 1; });
  }

  function outline(g, inside, colourName, width) {
    var w = TF.width / T, r = TF.height / C;
    g.strokeStyle = colourName; g.lineWidth = width; g.beginPath();
    for (var c = 0; c < C; c++) {
      for (var t = 0; t < T; t++) {
        if (!inside(c, t)) continue;
        var x = cell(c, t);
        if (t === 0 || !inside(c, t - 1)) { g.moveTo(x[0], x[1]); g.lineTo(x[0], x[1] + r); }
        if (t === T - 1 || !inside(c, t + 1)) { g.moveTo(x[0] + w, x[1]); g.lineTo(x[0] + w, x[1] + r); }
        if (c === 0 || !inside(c - 1, t)) { g.moveTo(x[0], x[1]); g.lineTo(x[0] + w, x[1]); }
        if (c === C - 1 || !inside(c + 1, t)) { g.moveTo(x[0], x[1] + r); g.lineTo(x[0] + w, x[1] + r); }
      }
    }
    g.stroke();
  }

  function timeTicks(g, left, width, bottom) {
    var span = d.times[T - 1] - d.times[0], tick = h.niceStep(span, 6);
    g.textAlign = "center"; g.textBaseline = "top";
    for (var value = Math.ceil(d.times[0] / tick) * tick; value <= d.times[T - 1] + 1e-9; value += tick) {
      var x = left + ((value - d.times[0]) / (span || 1) * (T - 1) + 0.5) * width / T;
      g.beginPath(); g.moveTo(x, bottom); g.lineTo(x, bottom + 4); g.stroke();
      g.fillText(h.fmt(value), x, bottom + 6);
    }
    g.fillText("time (ms)", left + width / 2, bottom + 22);
  }

  /* Channels (rows, first on top) x time: the statistic, significant outlines, the cursor's time. */
  function drawGrid() {
    var g = v.context(grid), cor = v.correction(), c, t;
    for (c = 0; c < C; c++) for (t = 0; t < T; t++) {
      var x = cell(c, t);
      g.fillStyle = v.colour(v.stat[c * T + t]);
      g.fillRect(x[0], x[1], x[2] + 0.6, x[3] + 0.6);
    }
    outline(g, function (c2, t2) { return cor.mask[c2 * T + t2] === 1; }, h.INK, 1.4);
    if (state.cluster !== null && cor.ids) {
      outline(g, function (c2, t2) { return cor.ids[c2 * T + t2] === state.cluster; }, h.HIGHLIGHT, 2.4);
    }
    var at = cell(0, state.t);
    g.strokeStyle = "#000000"; g.lineWidth = 1; g.setLineDash([4, 3]);
    g.beginPath(); g.moveTo(at[0] + at[2] / 2, TF.top); g.lineTo(at[0] + at[2] / 2, TF.top + TF.height); g.stroke();
    g.setLineDash([]);
    g.strokeStyle = h.INK; g.fillStyle = h.INK; g.strokeRect(TF.left, TF.top, TF.width, TF.height);
    timeTicks(g, TF.left, TF.width, TF.top + TF.height);
    var every = Math.max(1, Math.ceil(C / 30));
    g.textAlign = "right"; g.textBaseline = "middle";
    for (c = 0; c < C; c++) {
      var picked = state.sel.indexOf(c) >= 0, row = cell(c, 0);
      if (picked) { g.fillStyle = h.HIGHLIGHT; g.fillRect(TF.left - 5, row[1], 4, row[3]); }
      if (!picked && c % every) continue;
      g.font = (picked ? "bold 10px" : "9px") + " 'DejaVu Sans', Arial, sans-serif";
      g.fillStyle = picked ? h.INK : h.SOFT;
      g.fillText(d.channels[c], TF.left - 7, row[1] + row[3] / 2);
    }
    v.frame.colourBar(g);
    root.querySelector(".xp-tf-caption").innerHTML = "<b>" + h.esc(d.statLabel) + " at every channel and time</b>. " +
      "Black outline: significant after " + h.esc(cor.info.name) +
      (state.cluster !== null ? "; orange: the " + h.esc(cor.info.noun) + "'s extent" : "") +
      ". Orange marks: selected channels. Click a cell to select its channel (shift-click adds) and time; " +
      "the arrow keys move the time and the channel.";
  }

  /* The statistic's time course at the selected channels (their mean), bars under the significant span. */
  function drawCourse() {
    var g = v.context(course), cor = v.correction(), bottom = COURSE.top + COURSE.height, t;
    g.strokeStyle = "#c9ccd2"; g.lineWidth = 1;
    g.beginPath(); g.moveTo(COURSE.left, valueY(0)); g.lineTo(COURSE.left + COURSE.width, valueY(0)); g.stroke();
    g.fillStyle = h.HIGHLIGHT;
    for (t = 0; t < T; t++) {
      if (significantAt(t)) g.fillRect(COURSE.left + t * COURSE.width / T, bottom + 3, COURSE.width / T + 0.5, 5);
    }
    g.strokeStyle = h.INK; g.lineWidth = 1.6; g.beginPath();
    var drawing = false;
    for (t = 0; t < T; t++) {
      var value = v.meanAt(0, t);
      if (!isFinite(value)) { drawing = false; continue; }
      if (drawing) g.lineTo(timeX(t), valueY(value)); else g.moveTo(timeX(t), valueY(value));
      drawing = true;
    }
    g.stroke();
    g.strokeStyle = "#000000"; g.lineWidth = 1; g.setLineDash([4, 3]);
    g.beginPath(); g.moveTo(timeX(state.t), COURSE.top); g.lineTo(timeX(state.t), bottom); g.stroke();
    g.setLineDash([]);
    g.strokeStyle = h.INK; g.fillStyle = h.INK; g.font = "12px 'DejaVu Sans', Arial, sans-serif";
    g.strokeRect(COURSE.left, COURSE.top, COURSE.width, COURSE.height);
    timeTicks(g, COURSE.left, COURSE.width, bottom + 9);
    g.textAlign = "right"; g.textBaseline = "middle";
    [d.limit, 0, -d.limit].forEach(function (value) {
      g.beginPath(); g.moveTo(COURSE.left - 4, valueY(value)); g.lineTo(COURSE.left, valueY(value)); g.stroke();
      g.fillText(h.fmt(value), COURSE.left - 6, valueY(value));
    });
    g.save(); g.translate(14, COURSE.top + COURSE.height / 2); g.rotate(-Math.PI / 2);
    g.textAlign = "center"; g.fillText(d.statLabel, 0, 0); g.restore();
    var names = state.sel.map(function (c) { return d.channels[c]; });
    root.querySelector(".xp-course-caption").innerHTML = "<b>" + h.esc(d.statLabel) + " over time, " +
      (names.length === 1 ? "at " + h.esc(names[0]) : "mean over " + names.length + " channels (" +
      h.esc(names.join(", ")) + ")") + "</b>. Orange bars under the axis: times significant after " +
      h.esc(cor.info.name) + " at any selected channel. Click to move the cursor.";
  }

  function position(canvas, event) {
    var box = canvas.getBoundingClientRect();
    return [(event.clientX - box.left) * Number(canvas.dataset.w) / box.width,
            (event.clientY - box.top) * Number(canvas.dataset.h) / box.height];
  }
  function cellNear(event) {
    var xy = position(grid, event);
    var t = Math.floor((xy[0] - TF.left) / TF.width * T), c = Math.floor((xy[1] - TF.top) / TF.height * C);
    return t >= 0 && t < T && c >= 0 && c < C ? [c, t] : null;
  }
  function timeNear(event) {
    var t = Math.floor((position(course, event)[0] - COURSE.left) / COURSE.width * T);
    return t >= 0 && t < T ? t : null;
  }

  function bind() {
    grid.addEventListener("click", function (event) {
      var found = cellNear(event);
      if (!found) return;
      state.cluster = null;
      state.t = found[1];
      v.choose(found[0], event.shiftKey);
    });
    grid.addEventListener("mousemove", function (event) {
      var found = cellNear(event);
      if (found) v.readout.innerHTML = v.describePoint([found[0]], 0, found[1]);
    });
    course.addEventListener("click", function (event) {
      var t = timeNear(event);
      if (t === null) return;
      state.t = t;
      v.redraw();
    });
    course.addEventListener("mousemove", function (event) {
      var t = timeNear(event);
      if (t !== null) v.readout.innerHTML = v.describePoint(state.sel, 0, t);
    });
    grid.tabIndex = 0;
    grid.addEventListener("keydown", function (event) {
      var moves = {ArrowLeft: [0, -1], ArrowRight: [0, 1], ArrowUp: [-1, 0], ArrowDown: [1, 0]}[event.key];
      if (!moves) return;
      event.preventDefault();
      state.t = Math.max(0, Math.min(T - 1, state.t + moves[1]));
      if (moves[0]) {
        state.cluster = null;
        state.sel = [Math.max(0, Math.min(C - 1, state.sel[state.sel.length - 1] + moves[0]))];
      }
      v.redraw();
    });
  }

  return {draw: function () { drawGrid(); drawCourse(); }, bind: bind};
};
