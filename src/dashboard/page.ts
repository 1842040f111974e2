// The operations dashboard: one self-contained HTML page (inline style and script, plain SVG charts,
// nothing fetched from elsewhere) that draws the collector's snapshots as they arrive over SSE from
// `dashboard/feed`, relative to wherever the page is mounted.

const STYLE = String.raw`
:root {
  --bg: #f3f0e8; --panel: #fffdf8; --ink: #1e2b33; --muted: #6c7a7f; --rule: #e4ddcf; --faint: #efe9dd;
  --sea: #2f7d6d; --harbour: #7fa7c0; --sand: #d9c39a; --slate: #4f6d9a; --sage: #a3c48f; --stone: #cbc2b0;
  --rust: #b5654a; --ochre: #d5a24f; --heather: #8d8fa6; --plum: #5d4a6e;
}
* { box-sizing: border-box; }
html, body { margin: 0; background: var(--bg); color: var(--ink); }
body { font: 14px/1.4 ui-sans-serif, "DejaVu Sans", "Liberation Sans", Arial, sans-serif; padding: 22px 28px 28px; }
header { display: flex; align-items: center; gap: 14px; margin-bottom: 16px; }
header h1 { font-size: 21px; font-weight: 650; letter-spacing: .2px; margin: 0; }
header .sub { color: var(--muted); font-size: 13px; }
header .status { margin-left: auto; color: var(--muted); font-size: 12.5px; display: flex; align-items: center; gap: 7px; }
.dot { width: 9px; height: 9px; border-radius: 50%; background: var(--stone); display: inline-block; }
.dot.live { background: var(--sea); box-shadow: 0 0 0 3px rgba(47,125,109,.18); }
.kpis { display: grid; grid-template-columns: repeat(6, 1fr); gap: 12px; margin-bottom: 14px; }
.kpi { background: var(--panel); border: 1px solid var(--rule); border-radius: 10px; padding: 10px 14px; }
.kpi .v { font-size: 24px; font-weight: 650; font-variant-numeric: tabular-nums; }
.kpi .l { color: var(--muted); font-size: 12px; }
.grid { display: grid; grid-template-columns: repeat(12, 1fr); gap: 12px; }
.panel { background: var(--panel); border: 1px solid var(--rule); border-radius: 10px; padding: 12px 14px 10px; min-width: 0; }
.panel h2 { font-size: 14px; margin: 0; font-weight: 650; }
.panel .cap { color: var(--muted); font-size: 12px; margin: 2px 0 6px; }
.s12 { grid-column: span 12; } .s8 { grid-column: span 8; } .s6 { grid-column: span 6; } .s4 { grid-column: span 4; }
.legend { display: flex; flex-wrap: wrap; gap: 4px 14px; font-size: 12px; color: var(--muted); margin-top: 4px; }
.legend i { display: inline-block; width: 10px; height: 10px; border-radius: 2px; margin-right: 5px; vertical-align: -1px; }
.legend b { color: var(--ink); font-weight: 600; font-variant-numeric: tabular-nums; margin-left: 3px; }
svg.plot { display: block; width: 100%; }
header svg { flex: none; }
svg text { font-size: 10.5px; fill: var(--muted); font-variant-numeric: tabular-nums; }
table { width: 100%; border-collapse: collapse; font-size: 12.5px; font-variant-numeric: tabular-nums; }
th { text-align: left; color: var(--muted); font-weight: 500; border-bottom: 1px solid var(--rule); padding: 4px 6px; }
td { padding: 4px 6px; border-bottom: 1px solid var(--faint); }
td.n, th.n { text-align: right; }
td code { font: 12px ui-monospace, "DejaVu Sans Mono", monospace; color: var(--ink); }
.fill { display: inline-block; height: 8px; background: var(--faint); border-radius: 4px; width: 70px; vertical-align: 0; position: relative; overflow: hidden; }
.fill span { position: absolute; left: 0; top: 0; bottom: 0; background: var(--sea); }
.empty { color: var(--muted); font-size: 12px; padding: 18px 0; text-align: center; }
.lat { width: 100%; margin-top: 6px; }
.banner { display: none; margin: 0 0 14px; padding: 10px 14px; border-radius: 10px; font-size: 14px; }
.banner.down { display: block; background: #f6e3dc; border: 1px solid var(--rust); color: #6e2f1d; }
.banner.stale { display: block; background: #efe9dd; border: 1px solid var(--stone); color: var(--ink); }
.banner b { font-weight: 650; }
body.stale .kpis, body.stale main { filter: grayscale(1); opacity: .45; }
.unit { font-size: 10px; fill: var(--muted); }
.clip { fill: var(--rust); font-size: 10px; }
tr.me td { background: #f4efe3; }
.tag { display: inline-block; font-size: 11px; padding: 0 6px; border-radius: 8px; background: var(--faint); color: var(--muted); margin-left: 4px; }
.tag.bad { background: #f6e3dc; color: #6e2f1d; }
`;

// Plain ES2020 in a string (not a serialised function, so no bundler helper can leak into it). No backticks.
const SCRIPT = String.raw`
(function () {
  'use strict';
  var C = {
    slot: '#2f7d6d', logbook: '#7fa7c0', miss: '#d9c39a', degraded: '#b5654a', queued: '#d5a24f', drained: '#2f7d6d', overflow: '#5d4a6e',
    allocated: '#2f7d6d', overwritten: '#4f6d9a', reinforced: '#a3c48f', gated_out: '#cbc2b0',
    capacity: '#b5654a', decayed: '#d5a24f', expired: '#8d8fa6', erased: '#5d4a6e',
    read: '#2f7d6d', write: '#4f6d9a', turn: '#b5654a'
  };
  var LABEL = {
    slot: 'slot', logbook: 'logbook', miss: 'miss', degraded: 'degraded (no memory)', queued: 'queued', drained: 'drained', overflow: 'refused (full)',
    allocated: 'allocated', overwritten: 'overwritten',
    reinforced: 'reinforced', gated_out: 'gated out', capacity: 'capacity', decayed: 'decayed', expired: 'expired',
    erased: 'erased', read: 'read', write: 'write', turn: 'turn'
  };
  var H = 198, PAD = { l: 38, r: 8, t: 16, b: 20 };
  function $(id) { return document.getElementById(id); }
  function esc(s) { return String(s).replace(/[&<>"]/g, function (c) { return { '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;' }[c]; }); }
  function fmt(n, d) { if (n === null || n === undefined || !isFinite(n)) return '–'; return Number(n).toFixed(d === undefined ? 0 : d); }
  function ms(v) { if (v === null || v === undefined) return '–'; return v < 1 ? fmt(v, 2) + ' ms' : v < 10 ? fmt(v, 1) + ' ms' : fmt(v, 0) + ' ms'; }
  function sum(a) { var s = 0; for (var i = 0; i < a.length; i++) s += a[i] || 0; return s; }
  function niceMax(v) { if (!(v > 0)) return 1; var p = Math.pow(10, Math.floor(Math.log10(v))); var m = v / p; return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p; }
  function svg(w, h, inner) { return '<svg class="plot" width="' + w + '" height="' + h + '" viewBox="0 0 ' + w + ' ' + h + '" role="img">' + inner + '</svg>'; }
  function widthOf(id) { var el = document.querySelector('[data-panel="' + id + '"] .chart'); return Math.max(240, Math.floor(el.clientWidth || 380)); }
  function legend(keys, totals, suffix, share) {
    var all = 0; if (share && totals) keys.forEach(function (k) { all += totals[k] || 0; });
    return keys.map(function (k) { return '<span><i style="background:' + C[k] + '"></i>' + LABEL[k] + '<b>' + (totals ? fmt(totals[k]) + (suffix || '') : '') + (share && all ? ' (' + fmt(100 * totals[k] / all) + '%)' : '') + '</b></span>'; }).join('');
  }
  function unitLabel(text) { return '<text class="unit" x="' + (PAD.l - 34) + '" y="' + (PAD.t - 8) + '">' + esc(text) + '</text>'; }
  function yAxis(max, w, h, fmtY) {
    var out = '';
    for (var i = 0; i <= 4; i++) {
      var v = max * i / 4, y = h - PAD.b - (h - PAD.t - PAD.b) * i / 4;
      out += '<line x1="' + PAD.l + '" x2="' + (w - PAD.r) + '" y1="' + y + '" y2="' + y + '" stroke="#ece6da" stroke-width="1"/>';
      out += '<text x="' + (PAD.l - 5) + '" y="' + (y + 3.5) + '" text-anchor="end">' + (fmtY ? fmtY(v) : fmt(v, Math.round(v) === v ? 0 : 1)) + '</text>';
    }
    return out;
  }
  function xAxis(t, first, w, h, now) {
    var n = t.length - first, out = '', span = (now - t[first]) / 1000, step = span > 600 ? 300 : span > 240 ? 120 : span > 90 ? 60 : 30;
    for (var s = 0; s <= span; s += step) {
      var x = w - PAD.r - (w - PAD.l - PAD.r) * (s / Math.max(1, span));
      out += '<text x="' + x + '" y="' + (h - 5) + '" text-anchor="' + (s === 0 ? 'end' : 'middle') + '">' + (s === 0 ? 'now' : '−' + (s >= 60 ? (s / 60) + ' min' : s + ' s')) + '</text>';
    }
    return n > 0 ? out : '';
  }
  // Show from the first bucket with data (at least the last two minutes), so a young window is not mostly blank.
  function firstIndex(t, seriesList) {
    var n = t.length, first = n;
    for (var i = 0; i < n && first === n; i++) for (var j = 0; j < seriesList.length; j++) if (seriesList[j][i]) { first = i; break; }
    return Math.max(0, Math.min(first, n - 24));
  }
  // Counts per bucket, stacked. The scale follows the usual buckets, not a one-off spike (a drain after
  // an outage): a bar past the top is cut and labelled with its count, so the rest stays readable.
  function stacked(W, t, keys, data, unit, now) {
    var lists = keys.map(function (k) { return data[k]; });
    var first = firstIndex(t, lists), n = t.length - first, iw = W - PAD.l - PAD.r, ih = H - PAD.t - PAD.b;
    var totals = [], nz = [];
    for (var i = first; i < t.length; i++) { var s = 0; for (var j = 0; j < lists.length; j++) s += lists[j][i] || 0; totals.push(s); if (s > 0) nz.push(s); }
    nz.sort(function (a, b) { return a - b; });
    var usual = nz.length ? nz[Math.floor(0.9 * (nz.length - 1))] : 0, max = nz.length ? nz[nz.length - 1] : 0;
    var top = niceMax(max > 3 * usual && nz.length >= 5 ? usual * 1.5 : max);
    var bw = iw / n, out = yAxis(top, W, H, null) + unitLabel(unit);
    for (var b = 0; b < n; b++) {
      var tot = totals[b]; if (!tot) continue;
      var y = H - PAD.b, x = PAD.l + b * bw;
      for (var k = 0; k < lists.length; k++) {
        var v = lists[k][first + b] || 0; if (!v) continue;
        var hgt = Math.min(v / top * ih, y - PAD.t);
        if (hgt <= 0) break;
        y -= hgt;
        out += '<rect x="' + (x + 0.4).toFixed(2) + '" y="' + y.toFixed(2) + '" width="' + Math.max(0.8, bw - 0.8).toFixed(2) + '" height="' + hgt.toFixed(2) + '" fill="' + C[keys[k]] + '"/>';
      }
      if (tot > top) out += '<text class="clip" x="' + (x + bw / 2).toFixed(1) + '" y="' + (PAD.t + 9) + '" text-anchor="middle">▲' + fmt(tot) + '</text>';
    }
    return svg(W, H, out + xAxis(t, first, W, H, now));
  }
  function lines(W, t, series, now) {
    var first = firstIndex(t, series.map(function (s) { return s.values; })), n = t.length - first, iw = W - PAD.l - PAD.r, ih = H - PAD.t - PAD.b, max = 0;
    series.forEach(function (s) { for (var i = first; i < t.length; i++) if (s.values[i] > max) max = s.values[i]; });
    var top = niceMax(max * 1.1), out = yAxis(top, W, H, function (v) { return v === 0 ? '0' : v < 10 ? fmt(v, 1) : fmt(v); }) + unitLabel('ms');
    series.forEach(function (s) {
      var d = '', dots = '', run = [];
      // A bucket with no neighbour to join (the first 5 s of traffic, or one between gaps) is a dot, not an invisible path.
      function endRun() { if (run.length === 1) dots += '<circle class="dot" cx="' + run[0][0] + '" cy="' + run[0][1] + '" r="' + ((s.width || 2) + 1) + '" fill="' + s.color + '"/>'; run = []; }
      for (var i = first; i < t.length; i++) {
        var v = s.values[i];
        if (v === null || v === undefined) { endRun(); continue; }
        var x = (PAD.l + (i - first + 0.5) * iw / n).toFixed(1), y = (H - PAD.b - v / top * ih).toFixed(1);
        d += (run.length ? 'L' : 'M') + x + ' ' + y; run.push([x, y]);
      }
      endRun();
      out += '<path d="' + d + '" fill="none" stroke="' + s.color + '" stroke-width="' + (s.width || 2) + '" stroke-linejoin="round" stroke-linecap="round"' + (s.dash ? ' stroke-dasharray="' + s.dash + '"' : '') + '/>' + dots;
    });
    return svg(W, H, out + xAxis(t, first, W, H, now));
  }
  function histogram(w, bins) {
    var h = H, iw = w - PAD.l - PAD.r, ih = h - PAD.t - PAD.b, max = 0;
    bins.forEach(function (b) { if (b.count > max) max = b.count; });
    var top = niceMax(max), bw = iw / bins.length, out = yAxis(top, w, h) + unitLabel('sessions');
    bins.forEach(function (b, i) {
      var hgt = b.count / top * ih, x = PAD.l + i * bw;
      out += '<rect x="' + (x + 3).toFixed(1) + '" y="' + (h - PAD.b - hgt).toFixed(1) + '" width="' + (bw - 6).toFixed(1) + '" height="' + hgt.toFixed(1) + '" rx="2" fill="' + (i >= 9 ? '#b5654a' : '#2f7d6d') + '" fill-opacity="' + (0.45 + 0.055 * i).toFixed(2) + '"/>';
      if (i % 2 === 0) out += '<text x="' + x.toFixed(1) + '" y="' + (h - 5) + '" text-anchor="' + (i === 0 ? 'start' : 'middle') + '">' + Math.round(b.lo * 100) + '%</text>';
    });
    out += '<text x="' + (w - PAD.r) + '" y="' + (h - 5) + '" text-anchor="end">100% full</text>';
    return svg(w, h, out);
  }
  function survival(w, curve) {
    var h = H, iw = w - PAD.l - PAD.r, ih = h - PAD.t - PAD.b, steps = curve.steps;
    var tmax = steps.length ? steps[steps.length - 1].time * 1.15 : 10; tmax = niceMax(Math.max(tmax, 4));
    var X = function (t) { return PAD.l + t / tmax * iw; }, Y = function (s) { return h - PAD.b - s * ih; };
    var out = yAxis(1, w, h, function (v) { return fmt(v * 100) + '%'; }) + unitLabel('still in memory');
    for (var k = 0; k <= 5; k++) out += '<text x="' + X(tmax * k / 5).toFixed(1) + '" y="' + (h - 5) + '" text-anchor="' + (k === 0 ? 'start' : k === 5 ? 'end' : 'middle') + '">' + fmt(tmax * k / 5) + (k === 5 ? ' turns' : '') + '</text>';
    var d = 'M' + X(0) + ' ' + Y(1), up = [], lo = [];
    up.push([0, 1]); lo.push([0, 1]);
    steps.forEach(function (st) {
      d += 'H' + X(st.time).toFixed(1) + 'V' + Y(st.survival).toFixed(1);
      var se = isFinite(st.variance) ? Math.sqrt(st.variance) : 0;
      up.push([st.time, up[up.length - 1][1]], [st.time, Math.min(1, st.survival + 1.96 * se)]);
      lo.push([st.time, lo[lo.length - 1][1]], [st.time, Math.max(0, st.survival - 1.96 * se)]);
    });
    up.push([tmax, up[up.length - 1][1]]); lo.push([tmax, lo[lo.length - 1][1]]);
    var poly = up.concat(lo.reverse()).map(function (p) { return X(p[0]).toFixed(1) + ',' + Y(p[1]).toFixed(1); }).join(' ');
    var band = '<polygon points="' + poly + '" fill="#2f7d6d" fill-opacity="0.10"/>';
    d += 'H' + X(tmax).toFixed(1);
    out += band + '<line x1="' + PAD.l + '" x2="' + (w - PAD.r) + '" y1="' + Y(0.5) + '" y2="' + Y(0.5) + '" stroke="#d5a24f" stroke-dasharray="4 3"/>';
    if (curve.median !== null) out += '<line x1="' + X(curve.median) + '" x2="' + X(curve.median) + '" y1="' + Y(0.5) + '" y2="' + Y(0) + '" stroke="#d5a24f" stroke-dasharray="4 3"/><text x="' + (X(curve.median) + 4) + '" y="' + (Y(0.5) - 5) + '" style="fill:#9a6d1f">median ' + fmt(curve.median) + '</text>';
    out += '<path d="' + d + '" fill="none" stroke="#2f7d6d" stroke-width="2.2"/>';
    return svg(w, h, out);
  }
  function setPanel(id, live, html, legendHtml) {
    var el = document.querySelector('[data-panel="' + id + '"]');
    el.setAttribute('data-live', String(live));
    el.querySelector('.chart').innerHTML = live > 0 ? html : '<div class="empty">waiting for traffic…</div>';
    if (legendHtml !== undefined) el.querySelector('.legend').innerHTML = legendHtml;
  }
  var last = 0, lastSnap = null;
  window.addEventListener('resize', function () { if (lastSnap) render(lastSnap); });
  function render(s) {
    last = Date.now(); lastSnap = s;
    var tot = s.totals, RK = ['slot', 'logbook', 'miss', 'degraded'], reads = tot.reads.slot + tot.reads.logbook + tot.reads.miss + tot.reads.degraded;
    var lastMin = 0; for (var i = Math.max(0, s.t.length - Math.round(60000 / s.bucketMs)); i < s.t.length; i++) lastMin += s.reads.slot[i] + s.reads.logbook[i] + s.reads.miss[i] + s.reads.degraded[i];
    var fleet = s.fleet || [], live = fleet.filter(function (f) { return f.live; }).length;
    $('who').textContent = (s.instance ? 'served by ' + s.instance : 'this process') + (fleet.length > 1 ? ' · fleet of ' + live + ' live process' + (live === 1 ? '' : 'es') + ' on one store' : '') + ' · last 15 minutes';
    banner(s);
    $('k-hit').textContent = tot.hitRatio === null ? '–' : fmt(tot.hitRatio * 100, 1) + '%';
    $('k-hit-n').textContent = 'hit share (slot + logbook)' + (reads ? ' · ' + fmt(tot.reads.slot + tot.reads.logbook) + ' of ' + fmt(reads) + ' reads' : '');
    $('k-rpm').textContent = fmt(lastMin);
    var f = s.figures;
    $('k-sessions').textContent = f ? fmt(f.sessions) : fmt(s.activeSessions);
    $('k-sessions-l').textContent = f ? 'sessions stored (' + fmt(s.activeSessions) + ' active here)' : 'active sessions (this process)';
    $('k-alive').textContent = f ? fmt(f.slots) : fmt(s.retention.alive);
    $('k-alive-l').textContent = f ? 'slots alive · ' + fmt(f.logbookEntries) + ' logbook entries' : 'slots alive (this process)';
    var c0 = s.retention.clock;
    $('k-median').textContent = c0.events === 0 ? 'none left yet' : c0.median === null ? 'over ' + fmt(c0.steps[c0.steps.length - 1].time) + ' turns' : fmt(c0.median) + ' turns';
    $('k-p95').textContent = ms(tot.latency.turn.p95 !== null ? tot.latency.turn.p95 : tot.latency.read.p95);

    setPanel('reads', reads, stacked(widthOf('reads'), s.t, RK, s.reads, 'reads / 5 s', s.atMs), legend(RK, tot.reads, '', true));
    var WK = ['allocated', 'overwritten', 'reinforced'], nw = tot.writes.allocated + tot.writes.overwritten + tot.writes.reinforced;
    setPanel('writes', nw + tot.writes.gated_out, stacked(widthOf('writes'), s.t, WK, s.writes, 'writes / 5 s', s.atMs), legend(WK, tot.writes, '', true) + '<span>refused by the gate (logbook only)<b>' + fmt(tot.writes.gated_out) + '</b></span>');
    var ne = sum(Object.keys(tot.evictions).map(function (k) { return tot.evictions[k]; }));
    setPanel('evictions', ne, stacked(widthOf('evictions'), s.t, ['capacity', 'decayed', 'expired', 'erased'], s.evictions, 'slots / 5 s', s.atMs), legend(['capacity', 'decayed', 'expired', 'erased'], tot.evictions, '', true));
    var OK = ['queued', 'drained', 'overflow'], no = tot.outbox.queued + tot.outbox.drained + tot.outbox.overflow, waiting = 0;
    fleet.forEach(function (x) { waiting += x.outboxDepth || 0; });
    setPanel('outbox', no, stacked(widthOf('outbox'), s.t, OK, s.outbox, 'writes / 5 s', s.atMs), legend(OK, tot.outbox) + '<span>waiting now<b>' + fmt(waiting) + '</b></span>');
    var rowsF = fleet.map(function (x) {
      var me = x.instance === s.instance;
      return '<tr' + (me ? ' class="me"' : '') + '><td><code>' + esc(x.instance) + '</code>' + (me ? '<span class="tag">this page</span>' : '') + (x.live ? '' : '<span class="tag bad">not heard from</span>') +
        '</td><td class="n">' + fmt(x.reads) + '</td><td class="n">' + (x.reads ? fmt(100 * x.hits / x.reads) + '%' : '–') + '</td><td class="n">' + fmt(x.degraded) + '</td><td class="n">' + fmt(x.writes) +
        '</td><td class="n">' + fmt(x.outboxDepth) + '</td><td class="n">' + (x.storeUp === null ? '–' : x.storeUp ? 'up' : '<b style="color:#b5654a">down</b>') + '</td><td class="n">' + ms(x.turnP95) + '</td></tr>';
    }).join('');
    var ft = document.querySelector('[data-panel="fleet"]');
    ft.setAttribute('data-live', String(fleet.length));
    ft.querySelector('.chart').innerHTML = fleet.length ? '<table><tr><th>process</th><th class="n">reads</th><th class="n">hit</th><th class="n">degraded</th><th class="n">writes</th><th class="n">outbox</th><th class="n">store</th><th class="n">worst turn p95</th></tr>' + rowsF + '</table>' : '<div class="empty">waiting for the first snapshot…</div>';
    setPanel('occupancy', s.occupancy.sessions, histogram(widthOf('occupancy'), s.occupancy.bins),
      '<span>sessions<b>' + fmt(s.occupancy.sessions) + '</b></span><span>mean fill<b>' + (s.occupancy.meanFill === null ? '–' : fmt(s.occupancy.meanFill * 100) + '%') + '</b></span><span>full<b>' + fmt(s.occupancy.bins[9].count) + '</b></span>');
    var c = s.retention.clock;
    setPanel('survival', c.events, survival(widthOf('survival'), c),
      '<span>slots observed<b>' + fmt(c.n) + '</b></span><span>left memory<b>' + fmt(c.events) + '</b></span><span>still alive (censored)<b>' + fmt(c.censored) + '</b></span>');
    var L = s.latency, lt = tot.latency;
    var nl = lt.read.count + lt.write.count + lt.turn.count;
    setPanel('latency', nl, lines(widthOf('latency'), s.t, [
      { values: L.turn.p95, color: C.turn }, { values: L.read.p95, color: C.read }, { values: L.write.p95, color: C.write }
    ], s.atMs), legend(['turn', 'read', 'write']) + '<span>lines: p95 per 5 s, in ms</span>');
    $('lat-table').innerHTML = '<tr><th></th><th class="n">p50</th><th class="n">p95</th><th class="n">p99</th><th class="n">count</th></tr>' +
      ['turn', 'read', 'write'].map(function (k) { var p = lt[k]; return '<tr><td><i style="display:inline-block;width:9px;height:9px;border-radius:2px;margin-right:6px;background:' + C[k] + '"></i>' + k + '</td><td class="n">' + ms(p.p50) + '</td><td class="n">' + ms(p.p95) + '</td><td class="n">' + ms(p.p99) + '</td><td class="n">' + fmt(p.count) + '</td></tr>'; }).join('');
    var rows = s.busiest.map(function (b) {
      var fill = b.capacity ? b.slotsInUse / b.capacity : 0;
      return '<tr><td><code>' + esc(b.session) + '</code></td><td class="n">' + fmt(b.reads) + '</td><td class="n">' + (b.reads ? fmt(100 * b.hits / b.reads) + '%' : '–') + '</td><td class="n">' + fmt(b.writes) +
        '</td><td class="n"><span class="fill"><span style="width:' + fmt(fill * 100) + '%"></span></span> ' + b.slotsInUse + '/' + b.capacity + '</td><td class="n">' + fmt((s.atMs - b.lastMs) / 1000) + ' s</td></tr>';
    }).join('');
    var bt = document.querySelector('[data-panel="sessions"]');
    bt.setAttribute('data-live', String(s.busiest.length));
    bt.querySelector('.chart').innerHTML = s.busiest.length ? '<table><tr><th>session</th><th class="n">reads</th><th class="n">hit</th><th class="n">writes</th><th class="n">slots</th><th class="n">idle</th></tr>' + rows + '</table>' : '<div class="empty">waiting for traffic…</div>';
    document.body.setAttribute('data-updated', String(s.atMs));
    tick();
  }
  // The outage banner names the store and how long it has been down; a page that stopped updating
  // says so and greys its figures out, so nobody reads old numbers as current.
  function banner(s) {
    var b = $('banner'), st = s.store;
    if (st && st.up === false) {
      b.className = 'banner down';
      b.innerHTML = '<b>Store ' + esc(st.store) + ' unreachable for ' + dur(st.downForMs) + '.</b> Reads run with empty memory (degraded); writes wait in the outbox until it is back. Cause: ' + esc(st.cause || 'no answer');
    } else if (st && st.up === null) {
      b.className = 'banner stale';
      b.innerHTML = '<b>Waiting for store ' + esc(st.store) + ' to answer.</b>';
    } else if (b.className !== 'banner stale' || !b.getAttribute('data-frozen')) {
      b.className = 'banner'; b.innerHTML = '';
    }
  }
  function dur(msv) { if (msv === null || msv === undefined) return '–'; var sec = Math.round(msv / 1000); return sec < 90 ? sec + ' s' : Math.round(sec / 60) + ' min'; }
  function tick() {
    var age = last ? Math.round((Date.now() - last) / 1000) : null, dot = $('dot'), b = $('banner');
    dot.className = 'dot' + (age !== null && age < 5 ? ' live' : '');
    $('status').textContent = age === null ? 'connecting…' : age < 2 ? 'live' : 'last update ' + age + ' s ago';
    var frozen = age !== null && age >= 5;
    document.body.classList.toggle('stale', frozen);
    if (frozen) { b.className = 'banner stale'; b.setAttribute('data-frozen', '1'); b.innerHTML = '<b>No update for ' + age + ' s</b> — this process is not answering the feed; the figures below are frozen.'; }
    else if (b.getAttribute('data-frozen')) { b.removeAttribute('data-frozen'); if (lastSnap) banner(lastSnap); }
  }
  var base = location.pathname.replace(/\/+$/, '');
  var es = new EventSource(base + '/feed');
  es.addEventListener('snapshot', function (e) { try { render(JSON.parse(e.data)); } catch (err) { console.error(err); } });
  setInterval(tick, 1000); tick();
})();
`;

function panel(id: string, span: string, title: string, caption: string, extra = ''): string {
  return `<section class="panel ${span}" data-panel="${id}" data-live="0"><h2>${title}</h2><div class="cap">${caption}</div><div class="chart"><div class="empty">waiting for traffic…</div></div>${extra}<div class="legend"></div></section>`;
}

/** The dashboard HTML. */
export function dashboardPage(): string {
  const logo =
    '<svg width="30" height="30" viewBox="0 0 30 30" aria-hidden="true"><circle cx="15" cy="15" r="14" fill="#2f7d6d"/>' +
    '<path d="M4 17c3-3 5-3 7.5 0s4.5 3 7.5 0 5-3 7 0" fill="none" stroke="#f3f0e8" stroke-width="2.2" stroke-linecap="round"/>' +
    '<path d="M6 11.5h18" stroke="#d9c39a" stroke-width="2" stroke-linecap="round"/></svg>';
  const kpi = (id: string, label: string, labelId?: string): string =>
    `<div class="kpi"><div class="v" id="${id}">–</div><div class="l"${labelId ? ` id="${labelId}"` : ''}>${label}</div></div>`;
  return `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><meta name="viewport" content="width=device-width, initial-scale=1">
<title>tidemark · memory dashboard</title><style>${STYLE}</style></head>
<body>
<header>${logo}<div><h1>tidemark</h1><div class="sub" id="who">working memory, last 15 minutes</div></div>
<div class="status"><span class="dot" id="dot"></span><span id="status">connecting…</span></div></header>
<div class="banner" id="banner" role="status"></div>
<div class="kpis">${kpi('k-hit', 'hit share (slot + logbook)', 'k-hit-n')}${kpi('k-rpm', 'reads in the last minute')}${kpi('k-sessions', 'sessions stored', 'k-sessions-l')}${kpi('k-alive', 'slots alive', 'k-alive-l')}${kpi('k-median', 'median slot lifetime')}${kpi('k-p95', 'turn latency p95')}</div>
<main class="grid">
${panel('reads', 's8', 'Reads by result', 'Reads per 5 s, all processes: the top item was a relevant working-memory slot, a relevant logbook entry, nothing relevant (miss), or the store could not be read (degraded). Shares in the legend.')}
${panel('occupancy', 's4', 'Slot occupancy', 'Sessions this process served, by the share of their slots in use.')}
${panel('writes', 's4', 'Slot writes by outcome', 'Writes per 5 s: new slot, replaced value, strengthened slot. Candidates the gate refused are counted apart.')}
${panel('evictions', 's4', 'Evictions by reason', 'Slots leaving working memory per 5 s.')}
${panel('outbox', 's4', 'Outbox', 'Writes that met a store failure per 5 s: queued, drained once it was back, refused when full. A drain shows here.')}
${panel('fleet', 's12', 'Processes', 'Every process publishing to this store, over the window. Figures above are their sum.')}
${panel('survival', 's4', 'Slot survival', 'Kaplan–Meier estimate of the chance a slot is still in memory after n turns; live slots censored. Band: ±1.96 Greenwood SE.')}
${panel('latency', 's4', 'Latency', 'Turn (request to last byte), read and commit.', '<table class="lat" id="lat-table"></table>')}
${panel('sessions', 's4', 'Busiest sessions', 'By reads and writes in the window. Ids are keyed hashes.')}
</main>
<script>${SCRIPT}</script>
</body></html>`;
}
