// longwave's chart script: reads the chart options of a page from its
// <script type="application/json" id="lw-chart-data"> element (JSON data,
// never executed) and draws each with echarts.init/setOption into the
// element whose data-chart attribute names it. Tooltip text travels as
// data (a "tip" array of plain-text lines on a data item) and is escaped
// here before echarts shows it as HTML. A chart inside a closed <details>
// is drawn when it opens; a checkbox with data-chart-toggle="<key>" shows
// and hides the series its chart's option lists under lwApart.
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
  var options = {};
  var apart = {}; // chart key -> names of the series the page's switch shows

  // drawBox draws one chart box once. A box inside a closed <details> is
  // left until the details opens (echarts cannot size a hidden box).
  function drawBox(box) {
    if (box.getAttribute('data-drawn') === 'yes') {
      return;
    }
    var key = box.getAttribute('data-chart');
    var option = options[key];
    if (!option) {
      return;
    }
    var chart = echarts.init(box, null, { renderer: 'canvas' });
    chart.setOption(option);
    box.setAttribute('data-drawn', 'yes');
    drawn.push(chart);
    syncToggles(key);
  }

  function drawVisible() {
    var boxes = document.querySelectorAll('[data-chart]');
    for (var i = 0; i < boxes.length; i++) {
      var closed = boxes[i].closest('details:not([open])');
      if (!closed) {
        drawBox(boxes[i]);
      }
    }
  }

  // syncToggles shows or hides the series of a chart's switch.
  function syncToggles(key) {
    var inputs = document.querySelectorAll('input[data-chart-toggle="' + key + '"]');
    var box = document.querySelector('[data-chart="' + key + '"]');
    var chart = box && echarts.getInstanceByDom(box);
    if (!chart) {
      return;
    }
    for (var i = 0; i < inputs.length; i++) {
      var names = apart[key] || [];
      for (var j = 0; j < names.length; j++) {
        chart.dispatchAction({ type: inputs[i].checked ? 'legendSelect' : 'legendUnSelect', name: names[j] });
      }
    }
  }

  function draw() {
    var dataEl = document.getElementById('lw-chart-data');
    if (!dataEl || typeof echarts === 'undefined') {
      return;
    }
    options = JSON.parse(dataEl.textContent || '{}');
    for (var key in options) {
      if (!Object.prototype.hasOwnProperty.call(options, key)) {
        continue;
      }
      var option = options[key];
      option.tooltip = option.tooltip || {};
      option.tooltip.formatter = tooltipText;
      if (option.lwApart) {
        apart[key] = option.lwApart;
        delete option.lwApart;
      }
    }
    drawVisible();
    var groups = document.querySelectorAll('details');
    for (var i = 0; i < groups.length; i++) {
      groups[i].addEventListener('toggle', function () {
        drawVisible();
        resizeAll();
      });
    }
    var toggles = document.querySelectorAll('input[data-chart-toggle]');
    for (var t = 0; t < toggles.length; t++) {
      toggles[t].addEventListener('change', function (ev) {
        syncToggles(ev.target.getAttribute('data-chart-toggle'));
      });
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
