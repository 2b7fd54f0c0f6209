// longwave's chart script: reads the chart options of a page from its
// <script type="application/json" id="lw-chart-data"> element (JSON data,
// never executed) and draws each with echarts.init/setOption into the
// element whose data-chart attribute names it. Tooltip text travels as
// data (a "tip" array of plain-text lines on a data item) and is escaped
// here before echarts shows it as HTML.
(function () {
  'use strict';

  var entities = { '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' };
  function escapeText(s) {
    return String(s).replace(/[&<>"']/g, function (c) { return entities[c]; });
  }

  function tooltipText(p) {
    var d = p && p.data;
    var lines;
    if (d && Array.isArray(d.tip)) {
      lines = d.tip;
    } else if (d && d.length === 2 && p.componentType === 'markArea') {
      lines = [p.name || ''];
    } else {
      var v = p && p.value;
      lines = [p.seriesName || '', Array.isArray(v) ? v.join(', ') : (v === undefined ? '' : v)];
    }
    return lines.map(escapeText).join('<br>');
  }

  var drawn = [];

  function draw() {
    var dataEl = document.getElementById('lw-chart-data');
    if (!dataEl || typeof echarts === 'undefined') {
      return;
    }
    var set = JSON.parse(dataEl.textContent || '{}');
    var boxes = document.querySelectorAll('[data-chart]');
    for (var i = 0; i < boxes.length; i++) {
      var box = boxes[i];
      var option = set[box.getAttribute('data-chart')];
      if (!option) {
        continue;
      }
      option.tooltip = option.tooltip || {};
      option.tooltip.formatter = tooltipText;
      var chart = echarts.init(box, null, { renderer: 'canvas' });
      chart.setOption(option);
      box.setAttribute('data-drawn', 'yes');
      drawn.push(chart);
    }
    window.addEventListener('resize', resizeAll);
    window.addEventListener('beforeprint', resizeAll);
    window.addEventListener('afterprint', resizeAll);
  }

  function resizeAll() {
    for (var i = 0; i < drawn.length; i++) {
      drawn[i].resize();
    }
  }

  if (document.readyState === 'loading') {
    document.addEventListener('DOMContentLoaded', draw);
  } else {
    draw();
  }
})();
