// longwave's upload script: sends the Add recording form with
// XMLHttpRequest so that a progress bar can follow the upload, with the
// page's CSRF token in the X-CSRF-Token header, and shows the server's JSON
// answer with textContent only (never as HTML). Without this script the
// form posts as a plain form and the server answers with a page.
(function () {
  'use strict';
  var form = document.getElementById('upload-form');
  if (!form || typeof XMLHttpRequest === 'undefined' || typeof FormData === 'undefined') {
    return;
  }
  var bar = document.getElementById('upload-progress');
  var status = document.getElementById('upload-status');
  var result = document.getElementById('upload-result');

  function clear(el) {
    while (el.firstChild) {
      el.removeChild(el.firstChild);
    }
  }

  function para(cls, text) {
    var p = document.createElement('p');
    p.className = cls;
    p.textContent = text;
    return p;
  }

  function link(href, text) {
    var a = document.createElement('a');
    a.setAttribute('href', href);
    a.textContent = text;
    return a;
  }

  function show(ok, body) {
    clear(result);
    if (!ok) {
      var bad = para('problem', body && body.error ? body.error : 'The upload failed.');
      bad.setAttribute('role', 'alert');
      result.appendChild(bad);
      return;
    }
    var box = document.createElement('div');
    box.className = 'done';
    box.id = 'upload-done';
    box.appendChild(para('', body.message || 'Recording added.'));
    var links = document.createElement('p');
    if (body.visit_url) {
      links.appendChild(link(body.visit_url, 'Open the visit'));
      links.appendChild(document.createTextNode(' · '));
    }
    if (body.course_url) {
      links.appendChild(link(body.course_url, 'Open the course'));
    }
    box.appendChild(links);
    var flags = body.flags || [];
    if (flags.length) {
      var ul = document.createElement('ul');
      ul.className = 'flags';
      for (var i = 0; i < flags.length; i++) {
        var li = document.createElement('li');
        li.className = 'flag';
        li.textContent = flags[i].severity + ': ' + flags[i].reason;
        ul.appendChild(li);
      }
      box.appendChild(ul);
    }
    result.appendChild(box);
  }

  form.addEventListener('submit', function (ev) {
    ev.preventDefault();
    var data = new FormData(form);
    var limit = Number(form.getAttribute('data-limit'));
    var file = form.querySelector('input[name=file]').files[0];
    if (file && limit > 0 && file.size > limit) {
      status.textContent = 'Not sent.';
      show(false, { error: 'The file is larger than the upload limit of ' + form.getAttribute('data-limit-text') + '; nothing was sent.' });
      return;
    }
    var token = data.get('csrf');
    var xhr = new XMLHttpRequest();
    xhr.open('POST', form.getAttribute('action'));
    xhr.setRequestHeader('X-CSRF-Token', token);
    xhr.setRequestHeader('Accept', 'application/json');
    xhr.responseType = 'json';
    bar.hidden = false;
    bar.value = 0;
    status.textContent = 'Sending…';
    xhr.upload.addEventListener('progress', function (e) {
      if (e.lengthComputable) {
        bar.value = Math.round(100 * e.loaded / e.total);
        status.textContent = 'Sent ' + bar.value + ' %';
      }
    });
    xhr.upload.addEventListener('load', function () {
      status.textContent = 'Sent; analysing the recording…';
    });
    xhr.addEventListener('load', function () {
      bar.value = 100;
      var body = xhr.response;
      if (xhr.status === 413 && !(body && body.error)) {
        body = { error: 'The file is larger than the upload limit.' };
      }
      status.textContent = xhr.status >= 200 && xhr.status < 300 ? 'Done.' : 'Not added.';
      show(xhr.status >= 200 && xhr.status < 300, body);
    });
    xhr.addEventListener('error', function () {
      status.textContent = 'Not added.';
      show(false, { error: 'The connection to longwave failed during the upload.' });
    });
    xhr.send(data);
  });
})();
