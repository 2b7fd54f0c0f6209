// longwave's trace viewer: the whole recording of a visit, a page at a
// time, from GET /api/v1/visits/{id}/traces. The chart frame (grid, axes)
// comes built from the page's <script type="application/json"
// id="lw-traces-data"> element; each page adds its rows (one line series
// each, stacked), the analysis windows (kept and rejected, shaded apart, a
// rejected one labelled with its rule in words), the eye-state periods as a
// band along the top, and a µV scale bar at the right edge. All text from
// the answer (channel labels, words) goes into the chart as data and into
// the page through textContent only.
(function () {
  'use strict';

  var PAGE = 10; // seconds a page

  function start() {
    var dataEl = document.getElementById('lw-traces-data');
    var box = document.getElementById('trace-chart');
    if (!dataEl || !box || typeof echarts === 'undefined') {
      return;
    }
    var cfg = JSON.parse(dataEl.textContent || '{}');
    var el = {
      back: document.getElementById('trace-back'),
      next: document.getElementById('trace-next'),
      where: document.getElementById('trace-where'),
      montage: document.getElementById('trace-montage'),
      filtered: document.getElementById('trace-filtered'),
      height: document.getElementById('trace-height'),
      rejected: document.getElementById('trace-rejected'),
      problem: document.getElementById('trace-problem')
    };
    var chart = echarts.init(box, null, { renderer: 'canvas' });
    var state = { from: 0, duration: cfg.duration || 0, height: 0, seq: 0, page: null };

    // A page can be linked: #from=120&montage=bipolar&filtered=0 opens the
    // viewer there (values it does not know are passed over).
    function choose(sel, value) {
      for (var i = 0; i < sel.options.length; i++) {
        if (sel.options[i].value === value) {
          sel.value = value;
        }
      }
    }
    location.hash.replace(/^#/, '').split('&').forEach(function (part) {
      var kv = part.split('=');
      var v = decodeURIComponent(kv[1] || '');
      switch (kv[0]) {
        case 'from':
          if (/^[0-9]+$/.test(v) && (!state.duration || Number(v) < state.duration)) {
            state.from = Math.floor(Number(v) / PAGE) * PAGE;
          }
          break;
        case 'montage': choose(el.montage, v); break;
        case 'filtered': choose(el.filtered, v); break;
      }
    });

    function query() {
      return '?from=' + state.from + '&seconds=' + PAGE + '&montage=' + encodeURIComponent(el.montage.value) +
        '&filtered=' + encodeURIComponent(el.filtered.value);
    }

    function load() {
      var seq = ++state.seq;
      box.setAttribute('data-loading', 'yes');
      fetch(cfg.source + query(), { credentials: 'same-origin', headers: { Accept: 'application/json' } })
        .then(function (res) {
          return res.json().then(function (body) {
            if (!res.ok) {
              throw new Error(body && body.error ? body.error : 'the page could not be loaded');
            }
            return body;
          });
        })
        .then(function (page) {
          if (seq !== state.seq) {
            return;
          }
          el.problem.hidden = true;
          state.page = page;
          state.duration = page.duration;
          if (!state.height) {
            state.height = pickHeight(page);
            el.height.value = String(state.height);
          }
          draw(page);
        })
        .catch(function (err) {
          if (seq !== state.seq) {
            return;
          }
          if (!state.page && state.from > 0) {
            state.from = 0; // a linked page past the end: start at the beginning
            load();
            return;
          }
          el.problem.textContent = 'Traces: ' + err.message;
          el.problem.hidden = false;
          box.removeAttribute('data-loading');
        });
    }

    // pickHeight chooses the smallest offered row height that holds the
    // page's typical swing (twice the 98th percentile of |v| over rows).
    function pickHeight(page) {
      var all = [];
      page.channels.forEach(function (ch) {
        if (ch.bad) {
          return;
        }
        for (var i = 0; i < ch.samples.length; i += 4) {
          var v = ch.samples[i];
          if (v !== null) {
            all.push(Math.abs(v));
          }
        }
      });
      all.sort(function (a, b) { return a - b; });
      var swing = all.length ? 2 * all[Math.floor(0.98 * (all.length - 1))] : 0;
      var hs = cfg.heights;
      for (var i = 0; i < hs.length; i++) {
        if (hs[i] >= swing) {
          return hs[i];
        }
      }
      return hs[hs.length - 1];
    }

    function fmt(v) {
      return (Math.round(v * 10) / 10).toString();
    }

    // slots places the rows from the top, counting in rows: in the bipolar
    // montage a chain starts where a row does not begin at the electrode
    // the row above ends at, and a chain after the first starts one row
    // lower (an empty row between chains).
    function slots(page) {
      var out = [];
      var slot = 0;
      var prevEnd = null;
      page.channels.forEach(function (ch) {
        var parts = ch.label.split('–');
        if (page.montage === 'bipolar' && prevEnd !== null && parts[0] !== prevEnd) {
          slot++;
        }
        prevEnd = parts.length === 2 ? parts[1] : null;
        out.push(slot++);
      });
      return out;
    }

    function draw(page) {
      var h = state.height;
      var at = slots(page);
      var n = at.length ? at[at.length - 1] + 1 : 0; // rows including the gaps
      var end = page.from + page.seconds;
      var top = (n - 0.4) * h; // the eye-state band lies above the first row
      var band = 0.45 * h;
      var labels = {};
      var series = [];
      page.channels.forEach(function (ch, k) {
        var off = (n - 1 - at[k]) * h;
        labels[Math.round(off * 1000)] = ch.label;
        var data = new Array(ch.samples.length);
        for (var i = 0; i < ch.samples.length; i++) {
          var v = ch.samples[i];
          data[i] = [page.from + i / page.sample_rate, v === null ? '-' : v + off];
        }
        var colour = ch.bad ? cfg.colours.Bad : cfg.colours.Trace;
        series.push({ type: 'line', name: ch.label, data: data, showSymbol: false, silent: true, animation: false,
          lineStyle: { color: colour, width: 0.8 }, itemStyle: { color: colour }, z: 3 });
      });
      // Windows: kept and rejected, each its own colour; rejected ones
      // carry their rule in words.
      var areas = [];
      var list = [];
      page.windows.forEach(function (w) {
        var words = w.kept ? 'kept' : (w.reason_text || 'rejected');
        if (w.region_text) {
          words = w.region_text + ': ' + words;
        }
        var item = { name: w.kept ? '' : words, xAxis: Math.max(w.start, page.from),
          itemStyle: { color: w.kept ? cfg.colours.Kept : cfg.colours.Rejected, borderColor: cfg.colours.Edge, borderWidth: 0.5 } };
        areas.push([item, { xAxis: Math.min(w.end, end) }]);
        if (!w.kept) {
          list.push(fmt(w.start) + '–' + fmt(w.end) + ' s: ' + words);
        }
      });
      series.push({ type: 'line', name: 'windows', data: [], silent: true,
        markArea: { silent: true, data: areas,
          label: { show: true, position: 'insideBottom', color: cfg.colours.Axis, fontSize: 10, overflow: 'truncate' } } });
      // Eye states along the top.
      var states = page.states.map(function (s) {
        return [{ name: s.state_text, xAxis: Math.max(s.start, page.from), yAxis: top,
          itemStyle: { color: s.state === 'closed' ? cfg.colours.Closed : cfg.colours.Open } },
        { xAxis: Math.min(s.end, end), yAxis: top + band }];
      });
      series.push({ type: 'line', name: 'eye state', data: [], silent: true,
        markArea: { silent: true, data: states, label: { show: true, position: 'inside', color: '#fff', fontSize: 10 } } });
      // The µV scale bar, one row high, at the right edge.
      var x = end + 0.25;
      series.push({ type: 'line', name: h + ' µV', data: [[x, -0.3 * h], [x, 0.7 * h]], showSymbol: false, silent: true,
        lineStyle: { color: cfg.colours.Scale, width: 3 }, itemStyle: { color: cfg.colours.Scale },
        endLabel: { show: true, formatter: h + ' µV', color: cfg.colours.Scale, fontSize: 11 } });

      var option = JSON.parse(JSON.stringify(cfg.frame));
      option.xAxis[0].min = page.from;
      option.xAxis[0].max = end + 0.6;
      option.xAxis[0].interval = 1;
      option.xAxis[0].axisLabel = option.xAxis[0].axisLabel || {};
      option.xAxis[0].axisLabel.formatter = function (v) { return v <= end + 1e-9 ? String(Math.round(v * 10) / 10) : ''; };
      option.yAxis[0].min = -h; // echarts counts the ticks from min: a multiple of h puts them on the rows
      option.yAxis[0].max = top + band;
      option.yAxis[0].interval = h;
      option.yAxis[0].axisLabel = option.yAxis[0].axisLabel || {};
      option.yAxis[0].axisLabel.formatter = function (v) { return labels[Math.round(v * 1000)] || ''; };
      option.series = series;
      chart.setOption(option, true);

      el.where.textContent = fmt(page.from) + '–' + fmt(Math.min(end, page.duration)) + ' s of ' + fmt(page.duration) + ' s · ' +
        (page.montage === 'bipolar' ? 'longitudinal bipolar' : 'common average') + ' · ' +
        (page.filtered ? 'as analysed (filtered)' : 'as recorded, each row\'s mean over the page removed');
      el.back.disabled = page.from <= 0;
      el.next.disabled = end >= page.duration;
      while (el.rejected.firstChild) {
        el.rejected.removeChild(el.rejected.firstChild);
      }
      var head = document.createElement('p');
      head.className = 'quiet';
      head.textContent = list.length ? 'Rejected on this page:' : 'No window of this page was rejected.';
      el.rejected.appendChild(head);
      if (list.length) {
        var ul = document.createElement('ul');
        ul.className = 'trace-reasons';
        list.forEach(function (t) {
          var li = document.createElement('li');
          li.textContent = t;
          ul.appendChild(li);
        });
        el.rejected.appendChild(ul);
      }
      if (window.history && history.replaceState) {
        history.replaceState(null, '', '#from=' + page.from + '&montage=' + encodeURIComponent(page.montage) +
          '&filtered=' + (page.filtered ? '1' : '0'));
      }
      box.setAttribute('data-from', String(page.from));
      box.setAttribute('data-montage', page.montage);
      box.setAttribute('data-filtered', page.filtered ? '1' : '0');
      box.setAttribute('data-rows', String(page.channels.length));
      box.removeAttribute('data-loading');
    }

    function go(from) {
      var last = state.duration > 0 ? Math.max(0, Math.ceil(state.duration / PAGE) * PAGE - PAGE) : 0;
      from = Math.max(0, Math.min(from, last));
      if (from === state.from && state.page) {
        return;
      }
      state.from = from;
      load();
    }

    el.back.addEventListener('click', function () { go(state.from - PAGE); });
    el.next.addEventListener('click', function () { go(state.from + PAGE); });
    el.montage.addEventListener('change', load);
    el.filtered.addEventListener('change', function () { state.height = 0; load(); });
    el.height.addEventListener('change', function () {
      state.height = Number(el.height.value);
      if (state.page) {
        draw(state.page);
      }
    });
    document.addEventListener('keydown', function (ev) {
      var t = ev.target && ev.target.tagName;
      if (t === 'INPUT' || t === 'SELECT' || t === 'TEXTAREA' || ev.altKey || ev.ctrlKey || ev.metaKey) {
        return;
      }
      // The arrow keys turn pages anywhere on the visit page; Page Up,
      // Page Down, Home and End only inside the viewer (elsewhere they
      // scroll the page as usual).
      var inside = document.getElementById('traces').contains(ev.target);
      var to = null;
      switch (ev.key) {
        case 'ArrowRight': to = state.from + PAGE; break;
        case 'ArrowLeft': to = state.from - PAGE; break;
        case 'PageDown': to = inside ? state.from + PAGE : null; break;
        case 'PageUp': to = inside ? state.from - PAGE : null; break;
        case 'Home': to = inside ? 0 : null; break;
        case 'End': to = inside ? state.duration : null; break;
      }
      if (to !== null) {
        ev.preventDefault();
        go(to);
      }
    });
    window.addEventListener('resize', function () { chart.resize(); });
    load();
  }

  if (document.readyState === 'loading') {
    document.addEventListener('DOMContentLoaded', start);
  } else {
    start();
  }
})();
