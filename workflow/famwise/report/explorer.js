/* famwise report explorer: one per contrast. Plain JavaScript, no network.
   Data layout and quantisation: famwise/report/explorer.py. */
(function () {
  "use strict";
  var INK = "#1d1d1f", SOFT = "#5b5f66", HIGHLIGHT = "#c77700";

  function bytes(b64) {
    var text = atob(b64), out = new Uint8Array(text.length);
    for (var i = 0; i < text.length; i++) out[i] = text.charCodeAt(i);
    return out;
  }
  /* base64 of zlib-compressed bytes -> Promise of the bytes (the browser's own inflater, no network). */
  function inflate(b64) {
    var stream = new Blob([bytes(b64)]).stream().pipeThrough(new DecompressionStream("deflate"));
    return new Response(stream).arrayBuffer().then(function (buffer) { return new Uint8Array(buffer); });
  }
  /* Every packed array of one contrast, inflated: {stat, p, corrections: [{p, mask, ids}]}. */
  function unpack(d) {
    var jobs = [inflate(d.stat), inflate(d.p)];
    d.corrections.forEach(function (c) {
      jobs.push(inflate(c.p), inflate(c.mask), c.ids ? inflate(c.ids) : Promise.resolve(null));
    });
    return Promise.all(jobs).then(function (found) {
      return {stat: found[0], p: found[1], corrections: d.corrections.map(function (_, k) {
        return {p: found[2 + 3 * k], mask: found[3 + 3 * k], ids: found[4 + 3 * k]};
      })};
    });
  }
  function int16(raw) {
    var view = new DataView(raw.buffer), out = new Int16Array(raw.length / 2);
    for (var i = 0; i < out.length; i++) out[i] = view.getInt16(2 * i, true);
    return out;
  }
  function pvalues(raw) {
    var view = new DataView(raw.buffer), out = new Float64Array(raw.length / 2);
    for (var i = 0; i < out.length; i++) out[i] = Math.pow(10, -view.getUint16(2 * i, true) / 1000);
    return out;
  }
  function bits(raw, n) {
    var out = new Uint8Array(n);
    for (var i = 0; i < n; i++) out[i] = (raw[i >> 3] >> (7 - (i & 7))) & 1;
    return out;
  }
  function fmtP(p) {
    if (p >= 0.9995) return "1";
    return p < 0.001 ? p.toExponential(1) : p.toPrecision(2);
  }
  function fmt(x, digits) {
    if (!isFinite(x)) return "n/a";
    return Math.abs(x) >= 1000 || Number.isInteger(x) ? String(Math.round(x)) : String(Number(x.toPrecision(digits || 3)));
  }
  function esc(text) {
    return String(text).replace(/[&<>"]/g, function (c) {
      return {"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;"}[c];
    });
  }
  function niceStep(span, count) {
    var raw = span / count, power = Math.pow(10, Math.floor(Math.log10(raw))), steps = [1, 2, 5, 10];
    for (var i = 0; i < steps.length; i++) if (steps[i] * power >= raw) return steps[i] * power;
    return 10 * power;
  }

  /* The explorer's data, state, geometry and shared helpers for one contrast. */
  function model(root, d, raw) {
    var C = d.shape[0], F = d.shape[1], T = d.shape[2], FT = F * T;
    var steps = int16(raw.stat), stat = new Float64Array(steps.length);
    for (var i = 0; i < steps.length; i++) stat[i] = steps[i] === -32768 ? NaN : steps[i] / 32767 * d.limit;
    var p = pvalues(raw.p);
    var corrections = d.corrections.map(function (c, k) {
      var packed = raw.corrections[k];
      return {info: c, p: pvalues(packed.p), mask: bits(packed.mask, C * FT), ids: packed.ids ? int16(packed.ids) : null};
    });
    var peak = 0;
    for (i = 0; i < stat.length; i++) if (Math.abs(stat[i]) > Math.abs(stat[peak]) || isNaN(stat[peak])) peak = i;
    var start = d.start && d.start.length ? d.start.slice() : [Math.floor(peak / FT)];
    var state = {sel: start.slice(), corr: 0, f: Math.floor(peak / T) % F, t: peak % T, cluster: null};
    var head = root.querySelector(".xp-head"), tf = root.querySelector(".xp-tf");
    var select = root.querySelector(".xp-correction"), readout = root.querySelector(".xp-readout");
    var list = root.querySelector(".xp-list"), detail = root.querySelector(".xp-detail");
    var ratio = window.devicePixelRatio || 1;
    /* A canvas drawn in CSS pixels at the screen's resolution. */
    function prepare(canvas) {
      canvas.style.width = canvas.width + "px";
      canvas.style.height = canvas.height + "px";
      canvas.dataset.w = canvas.width;
      canvas.dataset.h = canvas.height;
      canvas.width = canvas.width * ratio;
      canvas.height = canvas.height * ratio;
    }
    [head, tf].forEach(prepare);
    var extent = 1;
    d.xy.forEach(function (xy) { extent = Math.max(extent, 1.02 * Math.hypot(xy[0], xy[1])); });
    var HEAD = {cx: 160, cy: 178, r: 128 / extent};
    var TF = {left: 62, top: 24, width: 470, height: 270};
    head.dataset.cx = HEAD.cx; head.dataset.cy = HEAD.cy; head.dataset.r = HEAD.r;
    Object.keys(TF).forEach(function (key) { tf.dataset[key] = TF[key]; });

    function colour(value) {
      if (!isFinite(value)) return "#ffffff";
      var k = Math.round((value / d.limit + 1) / 2 * (d.colours.length - 1));
      return d.colours[Math.max(0, Math.min(d.colours.length - 1, k))];
    }
    function correction() { return corrections[state.corr]; }
    function meanAt(f, t) {
      var sum = 0, n = 0;
      state.sel.forEach(function (c) { var v = stat[c * FT + f * T + t]; if (isFinite(v)) { sum += v; n++; } });
      return n ? sum / n : NaN;
    }
    function anySelected(array, f, t, test) {
      for (var k = 0; k < state.sel.length; k++) if (test(array[state.sel[k] * FT + f * T + t])) return true;
      return false;
    }
    function channelXY(c) {
      return [HEAD.cx + d.xy[c][0] * HEAD.r, HEAD.cy - d.xy[c][1] * HEAD.r];
    }
    function context(canvas) {
      var g = canvas.getContext("2d");
      g.setTransform(ratio, 0, 0, ratio, 0, 0);
      g.clearRect(0, 0, canvas.width, canvas.height);
      g.font = "12px 'DejaVu Sans', Arial, sans-serif";
      return g;
    }

    function cellRect(f, t) {
      var w = TF.width / T, h = TF.height / F;
      return [TF.left + t * w, TF.top + (F - 1 - f) * h, w, h];
    }
    /* The cursor's place in words: "10 Hz, 350 ms" (voltage: "350 ms"), parts joined by `sep`. */
    function where(f, t, sep) {
      return (d.voltage ? "" : fmt(d.freqs[f]) + " Hz" + sep) + fmt(d.times[t]) + " ms";
    }
    function nearest(axis, value) {
      var best = 0;
      axis.forEach(function (x, k) { if (Math.abs(x - value) < Math.abs(axis[best] - value)) best = k; });
      return best;
    }

    return {root: root, d: d, C: C, F: F, T: T, FT: FT, stat: stat, p: p, corrections: corrections, start: start,
            state: state, head: head, tf: tf, select: select, readout: readout, list: list, detail: detail,
            extent: extent, HEAD: HEAD, TF: TF, colour: colour, correction: correction, meanAt: meanAt,
            anySelected: anySelected, channelXY: channelXY, context: context, cellRect: cellRect, nearest: nearest,
            prepare: prepare, where: where};
  }

  /* The head: interpolated statistic at the cursor, channels, significant rings, selection. */
  function headPainter(v) {
    var d = v.d, C = v.C, F = v.F, T = v.T, FT = v.FT, state = v.state, HEAD = v.HEAD, TF = v.TF;
    var root = v.root, colour = v.colour, correction = v.correction;
    var extent = v.extent, stat = v.stat, channelXY = v.channelXY, context = v.context, head = v.head;
    var where = v.where;

    function drawHead() {
      var g = context(head), cor = correction(), step = 3, base = state.f * T + state.t;
      var radius = extent * HEAD.r;
      g.save(); g.beginPath(); g.arc(HEAD.cx, HEAD.cy, radius, 0, 2 * Math.PI); g.clip();
      for (var y = HEAD.cy - radius; y < HEAD.cy + radius; y += step) {
        for (var x = HEAD.cx - radius; x < HEAD.cx + radius; x += step) {
          var ux = (x + step / 2 - HEAD.cx) / HEAD.r, uy = (HEAD.cy - y - step / 2) / HEAD.r;
          if (Math.hypot(ux, uy) > extent) continue;
          var num = 0, den = 0;
          for (var c = 0; c < C; c++) {
            var v = stat[c * FT + base];
            if (!isFinite(v)) continue;
            var w = 1 / Math.pow(Math.pow(ux - d.xy[c][0], 2) + Math.pow(uy - d.xy[c][1], 2) + 1e-4, 1.5);
            num += w * v; den += w;
          }
          g.fillStyle = colour(den ? num / den : NaN);
          g.fillRect(x, y, step, step);
        }
      }
      g.restore();
      g.strokeStyle = INK; g.lineWidth = 1.3;
      g.beginPath(); g.arc(HEAD.cx, HEAD.cy, HEAD.r, 0, 2 * Math.PI); g.stroke();
      g.beginPath(); g.moveTo(HEAD.cx - 0.09 * HEAD.r, HEAD.cy - 0.995 * HEAD.r);
      g.lineTo(HEAD.cx, HEAD.cy - 1.1 * HEAD.r); g.lineTo(HEAD.cx + 0.09 * HEAD.r, HEAD.cy - 0.995 * HEAD.r); g.stroke();
      [-1, 1].forEach(function (side) {
        g.beginPath(); g.moveTo(HEAD.cx + side * HEAD.r, HEAD.cy - 0.12 * HEAD.r);
        g.lineTo(HEAD.cx + side * 1.05 * HEAD.r, HEAD.cy - 0.08 * HEAD.r);
        g.lineTo(HEAD.cx + side * 1.05 * HEAD.r, HEAD.cy + 0.12 * HEAD.r);
        g.lineTo(HEAD.cx + side * HEAD.r, HEAD.cy + 0.16 * HEAD.r); g.stroke();
      });
      g.font = "10px 'DejaVu Sans', Arial, sans-serif";
      g.textAlign = "center";
      for (var c2 = 0; c2 < C; c2++) {
        var xy = channelXY(c2), chosen = state.sel.indexOf(c2) >= 0, sig = cor.mask[c2 * FT + base];
        g.beginPath(); g.arc(xy[0], xy[1], sig ? 5.5 : 2.2, 0, 2 * Math.PI);
        g.fillStyle = sig ? "#ffffff" : "#3a3a3a"; g.fill();
        if (sig) { g.lineWidth = 1.6; g.strokeStyle = INK; g.stroke(); }
        if (chosen) {
          g.beginPath(); g.arc(xy[0], xy[1], 8.5, 0, 2 * Math.PI);
          g.lineWidth = 2.4; g.strokeStyle = HIGHLIGHT; g.stroke();
        }
      }
      g.lineJoin = "round";
      for (var c3 = 0; c3 < C; c3++) {
        var at = channelXY(c3), picked = state.sel.indexOf(c3) >= 0;
        if (!picked && C > 40) continue;
        g.font = (picked ? "bold 11.5px" : "10.5px") + " 'DejaVu Sans', Arial, sans-serif";
        g.lineWidth = 3; g.strokeStyle = "rgba(255,255,255,0.85)";
        g.strokeText(d.channels[c3], at[0], at[1] - (picked ? 12 : 8));
        g.fillStyle = picked ? INK : SOFT;
        g.fillText(d.channels[c3], at[0], at[1] - (picked ? 12 : 8));
      }
      root.querySelector(".xp-head-caption").innerHTML = "<b>" + esc(d.statLabel) + " at " + where(state.f, state.t, ", ") +
        "</b> (the cursor), on the map's colour scale. Rings: channels significant there after " +
        esc(cor.info.name) + ". Orange: selected. Click a channel to select it, shift-click to add.";
    }
    return drawHead;
  }

  /* The time-frequency map of the selected channels with its outlines and the cursor. */
  function mapPainter(v) {
    var d = v.d, C = v.C, F = v.F, T = v.T, FT = v.FT, state = v.state, HEAD = v.HEAD, TF = v.TF;
    var root = v.root, colour = v.colour, correction = v.correction;
    var cellRect = v.cellRect, context = v.context, meanAt = v.meanAt, anySelected = v.anySelected, tf = v.tf;
    var frame = v.frame;

    function outlineCells(g, inside, colourName, width) {
      var w = TF.width / T, h = TF.height / F;
      g.strokeStyle = colourName; g.lineWidth = width; g.beginPath();
      for (var f = 0; f < F; f++) {
        for (var t = 0; t < T; t++) {
          if (!inside(f, t)) continue;
          var r = cellRect(f, t);
          if (t === 0 || !inside(f, t - 1)) { g.moveTo(r[0], r[1]); g.lineTo(r[0], r[1] + h); }
          if (t === T - 1 || !inside(f, t + 1)) { g.moveTo(r[0] + w, r[1]); g.lineTo(r[0] + w, r[1] + h); }
          if (f === F - 1 || !inside(f + 1, t)) { g.moveTo(r[0], r[1]); g.lineTo(r[0] + w, r[1]); }
          if (f === 0 || !inside(f - 1, t)) { g.moveTo(r[0], r[1] + h); g.lineTo(r[0] + w, r[1] + h); }
        }
      }
      g.stroke();
    }

    function drawMap() {
      var g = context(tf), cor = correction(), f, t;
      for (f = 0; f < F; f++) for (t = 0; t < T; t++) {
        var r = cellRect(f, t);
        g.fillStyle = colour(meanAt(f, t));
        g.fillRect(r[0], r[1], r[2] + 0.6, r[3] + 0.6);
      }
      var zero = d.times.findIndex(function (x) { return x >= 0; });
      if (zero > 0) {
        var z = TF.left + (zero - (d.times[zero] / (d.times[zero] - d.times[zero - 1]))) * TF.width / T + TF.width / T / 2;
        g.setLineDash([2, 3]); g.strokeStyle = SOFT; g.lineWidth = 1;
        g.beginPath(); g.moveTo(z, TF.top); g.lineTo(z, TF.top + TF.height); g.stroke(); g.setLineDash([]);
      }
      outlineCells(g, function (f2, t2) { return anySelected(cor.mask, f2, t2, function (v) { return v === 1; }); },
                   INK, 1.8);
      if (state.cluster !== null && cor.ids) {
        var id = state.cluster;
        outlineCells(g, function (f2, t2) {
          for (var c = 0; c < C; c++) if (cor.ids[c * FT + f2 * T + t2] === id) return true;
          return false;
        }, HIGHLIGHT, 2.6);
      }
      var cr = cellRect(state.f, state.t);
      g.strokeStyle = "#000000"; g.lineWidth = 1; g.setLineDash([4, 3]);
      g.beginPath(); g.moveTo(cr[0] + cr[2] / 2, TF.top); g.lineTo(cr[0] + cr[2] / 2, TF.top + TF.height);
      g.moveTo(TF.left, cr[1] + cr[3] / 2); g.lineTo(TF.left + TF.width, cr[1] + cr[3] / 2); g.stroke();
      g.setLineDash([]); g.lineWidth = 2; g.strokeRect(cr[0], cr[1], cr[2], cr[3]);
      frame.axes(g);
      frame.colourBar(g);
      var names = state.sel.map(function (c) { return d.channels[c]; });
      root.querySelector(".xp-tf-caption").innerHTML = "<b>" + esc(d.statLabel) + ", mean over " +
        (names.length === 1 ? esc(names[0]) : names.length + " channels (" + esc(names.join(", ")) + ")") +
        "</b>. Black outline: significant after " + esc(cor.info.name) + " at any selected channel" +
        (state.cluster !== null ? "; orange: the " + esc(cor.info.noun) + "'s extent" : "") +
        ". Click or use the arrow keys to move the cursor.";
    }
    return drawMap;
  }

  /* Axes and colour bar of the time-frequency map. */
  function framePainter(v) {
    var d = v.d, F = v.F, T = v.T, TF = v.TF, cellRect = v.cellRect, colour = v.colour;

    function drawAxes(g) {
      g.strokeStyle = INK; g.lineWidth = 1; g.fillStyle = INK; g.font = "12px 'DejaVu Sans', Arial, sans-serif";
      g.strokeRect(TF.left, TF.top, TF.width, TF.height);
      var span = d.times[T - 1] - d.times[0], tick = niceStep(span, 6), bottom = TF.top + TF.height;
      g.textAlign = "center"; g.textBaseline = "top";
      for (var value = Math.ceil(d.times[0] / tick) * tick; value <= d.times[T - 1] + 1e-9; value += tick) {
        var x = TF.left + ((value - d.times[0]) / (span || 1) * (T - 1) + 0.5) * TF.width / T;
        g.beginPath(); g.moveTo(x, bottom); g.lineTo(x, bottom + 4); g.stroke();
        g.fillText(fmt(value), x, bottom + 6);
      }
      g.fillText("time (ms)", TF.left + TF.width / 2, bottom + 24);
      g.textAlign = "right"; g.textBaseline = "middle";
      var every = Math.max(1, Math.ceil(F / 8));
      for (var f = 0; f < F; f += every) {
        var r = cellRect(f, 0), y = r[1] + r[3] / 2;
        g.beginPath(); g.moveTo(TF.left - 4, y); g.lineTo(TF.left, y); g.stroke();
        g.fillText(fmt(d.freqs[f]), TF.left - 6, y);
      }
      g.save(); g.translate(14, TF.top + TF.height / 2); g.rotate(-Math.PI / 2);
      g.textAlign = "center"; g.fillText("frequency (Hz)", 0, 0); g.restore();
    }

    function drawColourBar(g) {
      var x = TF.left + TF.width + 22, top = TF.top, h = TF.height, w = 14;
      for (var k = 0; k < h; k++) {
        g.fillStyle = colour(d.limit * (1 - 2 * k / (h - 1)));
        g.fillRect(x, top + k, w, 1.5);
      }
      g.strokeStyle = INK; g.strokeRect(x, top, w, h);
      g.fillStyle = INK; g.textAlign = "left"; g.textBaseline = "middle";
      [[d.limit, top], [0, top + h / 2], [-d.limit, top + h]].forEach(function (tick) {
        g.beginPath(); g.moveTo(x + w, tick[1]); g.lineTo(x + w + 4, tick[1]); g.stroke();
        g.fillText(fmt(tick[0]), x + w + 6, tick[1]);
      });
      g.textAlign = "center"; g.textBaseline = "bottom"; g.font = "bold 12px 'DejaVu Sans', Arial, sans-serif";
      g.fillText(d.statLabel, x + w / 2, top - 6);
    }
    return {axes: drawAxes, colourBar: drawColourBar};
  }

  /* Hover text, the cluster list, a cluster's row of the table and its per-subject values. */
  function panels(v) {
    var d = v.d, C = v.C, F = v.F, T = v.T, FT = v.FT, state = v.state, HEAD = v.HEAD, TF = v.TF;
    var root = v.root, colour = v.colour, correction = v.correction;
    var stat = v.stat, p = v.p, list = v.list, detail = v.detail, nearest = v.nearest;

    function clusterAt(c, f, t) {
      var cor = correction();
      return cor.ids ? cor.ids[c * FT + f * T + t] : 0;
    }
    function describePoint(channels, f, t) {
      var cor = correction(), values = channels.map(function (c) { return c * FT + f * T + t; });
      var s = 0, n = 0, ps = [], qs = [];
      values.forEach(function (k) { if (isFinite(stat[k])) { s += stat[k]; n++; } ps.push(p[k]); qs.push(cor.p[k]); });
      var range = function (list) {
        var lo = Math.min.apply(null, list), hi = Math.max.apply(null, list);
        return lo === hi ? fmtP(lo) : fmtP(lo) + " to " + fmtP(hi);
      };
      var label = channels.length === 1 ? d.channels[channels[0]] : "mean of " + channels.length + " channels";
      var text = "<b>" + esc(label) + "</b> · " + v.where(f, t, " · ") + " · " +
        esc(d.statLabel) + " = " + fmt(n ? s / n : NaN) + " · p = " + range(ps) + " (uncorrected" +
        (channels.length > 1 ? ", per channel" : "") + ") · corrected p = " + range(qs) + " (" + esc(cor.info.name) + ")";
      if (channels.length === 1 && clusterAt(channels[0], f, t)) {
        text += " · " + esc(cor.info.noun) + " " + clusterAt(channels[0], f, t);
      }
      return text;
    }

    function drawList() {
      var cor = correction(), info = cor.info;
      if (!cor.ids) {
        list.innerHTML = "<p>" + esc(info.name) + (info.name === info.method ? "" : " (" + esc(info.method) + ")") + " declares single points: " +
          info.n_significant + " significant. It forms no clusters.</p>";
        return;
      }
      if (!info.clusters.length) {
        list.innerHTML = "<p>No significant " + esc(info.noun) + " after " + esc(info.name) + ".</p>";
        return;
      }
      var rows = info.clusters.map(function (row) {
        var chosen = state.cluster === row.id ? ' class="xp-chosen"' : "";
        return "<tr data-id=\"" + row.id + "\"" + chosen + "><td>" + row.id + "</td><td>" +
          esc(/^(-|negative|-1)$/i.test(String(row.sign)) ? d.negative : d.positive) + "</td><td class=\"num\">" + fmtP(row.p) +
          "</td><td class=\"num\">" + row.n_points + "</td><td class=\"num\">" + String(row.channels).split(",").length +
          "</td><td>" + fmt(row.time_start_ms) + " to " + fmt(row.time_end_ms) + " ms</td>" +
          (d.voltage ? "" : "<td>" + fmt(row.freq_low_hz) + " to " + fmt(row.freq_high_hz) + " Hz</td>") + "</tr>";
      });
      list.innerHTML = "<h4>Significant " + esc(info.noun) + "s of " + esc(info.name) + " (click one)</h4>" +
        "<table class=\"xp-clusters\"><thead><tr><th>id</th><th>direction</th><th>p</th><th>points</th>" +
        "<th>channels</th><th>time</th>" + (d.voltage ? "" : "<th>frequency</th>") + "</tr></thead><tbody>" +
        rows.join("") + "</tbody></table>";
      list.querySelectorAll("tr[data-id]").forEach(function (tr) {
        tr.addEventListener("click", function () { chooseCluster(Number(tr.dataset.id)); });
      });
    }

    function chooseCluster(id) {
      var info = correction().info, row = info.clusters.find(function (r) { return r.id === id; });
      if (!row) return;
      state.cluster = id;
      var names = String(row.channels).split(",");
      state.sel = names.map(function (n) { return d.channels.indexOf(n); }).filter(function (c) { return c >= 0; });
      state.f = d.voltage ? 0 : nearest(d.freqs, row.peak_freq_hz);
      state.t = nearest(d.times, row.peak_time_ms);
      v.redraw();
    }
    function drawDetail() {
      var info = correction().info;
      var row = state.cluster === null ? null : info.clusters.find(function (r) { return r.id === state.cluster; });
      if (!row) { detail.innerHTML = ""; return; }
      var cells = Object.keys(row).map(function (k) {
        return "<tr><th>" + esc(k) + "</th><td>" + esc(typeof row[k] === "number" ? fmt(row[k], 4) : row[k]) + "</td></tr>";
      });
      detail.innerHTML = "<div><h4>" + esc(info.noun) + " " + row.id + ": its row of the table</h4><table>" +
        cells.join("") + "</table></div><div>" + stripSvg(d, info.values[String(row.id)], info.noun + " " + row.id, row.n_points) +
        "</div>";
    }
    return {describePoint: describePoint, list: drawList, detail: drawDetail};
  }

  /* SVG strip plot: each subject's value per strip, the group mean as a bar. */
  function stripSvg(d, strips, title, points) {
    if (!strips) return "<p>No per-subject values were found for this " + esc(title) + ".</p>";
    var W = Math.max(420, 110 + 130 * strips.length), H = 280, L = 64, R = 14, top = 30, bottom = 44, all = [0];
    strips.forEach(function (one) { all = all.concat(one.values); });
    var lo = Math.min.apply(null, all), hi = Math.max.apply(null, all), pad = (hi - lo) * 0.08 || 1;
    lo -= pad; hi += pad;
    var y = function (v) { return top + (hi - v) / (hi - lo) * (H - top - bottom); };
    var band = (W - L - R) / strips.length, out = [];
    out.push('<svg class="xp-strip" width="' + W + '" height="' + H + '" viewBox="0 0 ' + W + " " + H +
      '" role="img" aria-label="per-subject values of ' + esc(title) + '" font-family="DejaVu Sans, Arial, sans-serif">');
    out.push('<text x="' + L + '" y="16" font-size="12.5" font-weight="bold" fill="' + INK + '">' +
      "Each subject's mean over " + esc(title) + " (" + points + " points)</text>");
    var tick = niceStep(hi - lo, 5);
    for (var v = Math.ceil(lo / tick) * tick; v <= hi; v += tick) {
      var zero = Math.abs(v) < tick / 1e6;
      out.push('<line x1="' + (L - 4) + '" x2="' + (W - R) + '" y1="' + y(v) + '" y2="' + y(v) + '" stroke="' +
        (zero ? SOFT : "#eceef1") + '"' + (zero ? ' stroke-dasharray="3 3"' : "") + "/>");
      out.push('<text x="' + (L - 7) + '" y="' + (y(v) + 4) + '" font-size="11" text-anchor="end" fill="' + INK + '">' +
        fmt(zero ? 0 : v) + "</text>");
    }
    out.push('<text transform="translate(14 ' + ((top + H - bottom) / 2) + ') rotate(-90)" font-size="11.5" ' +
      'text-anchor="middle" fill="' + INK + '">' + esc(d.unit) + "</text>");
    var xs = strips.map(function (_, k) { return L + band * (k + 0.5); });
    var jitter = function (s) { return ((s * 0.618034) % 1 - 0.5) * band * 0.36; };
    if (strips[0].paired) {
      strips[0].values.forEach(function (value, s) {
        out.push('<line x1="' + (xs[0] + jitter(s)) + '" x2="' + (xs[1] + jitter(s)) + '" y1="' + y(value) +
          '" y2="' + y(strips[1].values[s]) + '" stroke="#b8bcc4" stroke-width="0.8"/>');
      });
    }
    strips.forEach(function (one, k) {
      var mean = one.values.reduce(function (a, b) { return a + b; }, 0) / one.values.length;
      one.values.forEach(function (value, s) {
        out.push('<circle cx="' + (xs[k] + jitter(s)) + '" cy="' + y(value) + '" r="3.6" fill="' +
          (one.label === "contrast" ? d.colours[d.colours.length - 8] : "#5d6f8f") + '" fill-opacity="0.8" ' +
          'stroke="#fff" stroke-width="0.6"><title>' + esc(one.subjects[s]) + ": " + fmt(value, 4) + "</title></circle>");
      });
      out.push('<line class="xp-mean" x1="' + (xs[k] - band * 0.3) + '" x2="' + (xs[k] + band * 0.3) + '" y1="' +
        y(mean) + '" y2="' + y(mean) + '" stroke="' + INK + '" stroke-width="2.4"/>');
      out.push('<text x="' + xs[k] + '" y="' + (H - bottom + 18) + '" font-size="12" text-anchor="middle" fill="' + INK +
        '">' + esc(one.label) + "</text>");
      out.push('<text x="' + xs[k] + '" y="' + (H - bottom + 33) + '" font-size="10.5" text-anchor="middle" fill="' +
        SOFT + '">mean ' + fmt(mean, 3) + " (n = " + one.values.length + ")</text>");
    });
    out.push("</svg>");
    return out.join("") + '<p class="xp-strip-note">Dots: subjects; bar: group mean. ' +
      "<b>Circular:</b> these points were selected by the same data as the test, so the values overstate the " +
      "effect; plot them, never test them again (note below).</p>";
  }

  /* Everything drawn again from the state; the state mirrored on the root for tests and scripts. */
  function redraw(v) {
    v.drawHead(); v.drawMap(); v.panels.list(); v.panels.detail();
    v.readout.innerHTML = v.panels.describePoint(v.state.sel, v.state.f, v.state.t);
    v.root.dataset.selected = v.state.sel.map(function (c) { return v.d.channels[c]; }).join(",");
    v.root.dataset.correction = v.correction().info.name;
    v.root.dataset.cursor = v.where(v.state.f, v.state.t, ",");
    v.root.dataset.cluster = v.state.cluster === null ? "" : String(v.state.cluster);
    v.root.querySelector(".xp-selection").textContent = "selected: " +
      v.state.sel.map(function (c) { return v.d.channels[c]; }).join(", ");
  }

  function position(canvas, event) {
    var box = canvas.getBoundingClientRect();
    return [(event.clientX - box.left) * Number(canvas.dataset.w) / box.width,
            (event.clientY - box.top) * Number(canvas.dataset.h) / box.height];
  }

  /* Channel clicks and hover on the head, the correction selector and the reset. */
  function bind(v) {
    var C = v.C, state = v.state, root = v.root, head = v.head, select = v.select, readout = v.readout;

    function channelNear(event) {
      var xy = position(head, event), best = -1, bestDistance = 12;
      for (var c = 0; c < C; c++) {
        var at = v.channelXY(c), distance = Math.hypot(at[0] - xy[0], at[1] - xy[1]);
        if (distance < bestDistance) { best = c; bestDistance = distance; }
      }
      return best;
    }
    /* Select channel c (shift: add it, or drop it if selected and not the last). */
    v.choose = function (c, shift) {
      state.cluster = null;
      if (shift) {
        var at = state.sel.indexOf(c);
        if (at < 0) state.sel.push(c); else if (state.sel.length > 1) state.sel.splice(at, 1);
      } else {
        state.sel = [c];
      }
      v.redraw();
    };
    head.addEventListener("click", function (event) {
      var c = channelNear(event);
      if (c >= 0) v.choose(c, event.shiftKey);
    });
    head.addEventListener("mousemove", function (event) {
      var c = channelNear(event);
      head.style.cursor = c < 0 ? "default" : "pointer";
      if (c >= 0) readout.innerHTML = v.describePoint([c], state.f, state.t);
    });
    select.addEventListener("change", function () {
      state.corr = Number(select.value);
      state.cluster = null;
      v.redraw();
    });
    root.querySelector(".xp-clear").addEventListener("click", function () {
      state.sel = v.start.slice();
      state.cluster = null;
      v.redraw();
    });
  }

  /* Clicks, drags and keys on the time-frequency map. */
  function bindMap(v) {
    var F = v.F, T = v.T, state = v.state, TF = v.TF, root = v.root, tf = v.tf, readout = v.readout;

    function cellNear(event) {
      var xy = position(tf, event);
      var t = Math.floor((xy[0] - TF.left) / TF.width * T), f = F - 1 - Math.floor((xy[1] - TF.top) / TF.height * F);
      return t >= 0 && t < T && f >= 0 && f < F ? [f, t] : null;
    }
    function moveCursor(event) {
      var cell = cellNear(event);
      if (!cell) return;
      state.f = cell[0]; state.t = cell[1];
      v.drawHead(); v.drawMap();
      root.dataset.cursor = v.where(state.f, state.t, ",");
    }
    tf.addEventListener("click", moveCursor);
    tf.addEventListener("mousemove", function (event) {
      var cell = cellNear(event);
      if (cell) readout.innerHTML = v.describePoint(state.sel, cell[0], cell[1]);
      if (event.buttons === 1) moveCursor(event);
    });
    tf.tabIndex = 0;
    tf.addEventListener("keydown", function (event) {
      var moves = {ArrowLeft: [0, -1], ArrowRight: [0, 1], ArrowUp: [1, 0], ArrowDown: [-1, 0]}[event.key];
      if (!moves) return;
      event.preventDefault();
      state.f = Math.max(0, Math.min(F - 1, state.f + moves[0]));
      state.t = Math.max(0, Math.min(T - 1, state.t + moves[1]));
      readout.innerHTML = v.describePoint(state.sel, state.f, state.t);
      v.redraw();
    });
  }

  function Explorer(root) {
    var d = JSON.parse(root.querySelector(".xp-data").textContent);
    if (typeof DecompressionStream === "undefined") {
      root.querySelector(".xp-nojs").textContent = "The explorer needs a browser from 2023 or later; " +
        "the figures above show the same results.";
      return;
    }
    unpack(d).then(function (raw) {
      var v = model(root, d, raw);
      v.drawHead = headPainter(v);
      v.frame = framePainter(v);
      v.panels = panels(v);
      v.describePoint = v.panels.describePoint;
      v.redraw = function () { redraw(v); };
      bind(v);
      if (d.voltage) {
        var views = famwiseVoltageViews(v, {INK: INK, SOFT: SOFT, HIGHLIGHT: HIGHLIGHT, fmt: fmt, esc: esc,
                                            niceStep: niceStep});
        v.drawMap = views.draw;
        views.bind();
      } else {
        v.drawMap = mapPainter(v);
        bindMap(v);
      }
      v.redraw();
      root.classList.add("xp-ready");
    });
  }

  function start() {
    document.querySelectorAll(".explorer[data-explorer]").forEach(function (root) { Explorer(root); });
  }
  if (document.readyState === "loading") document.addEventListener("DOMContentLoaded", start); else start();
})();
