/* The report's comparison slider, the choice of the two lightings shown and the exposure switch (render.output.report): inlined in the
   page, whose Content-Security-Policy allows it by its SHA-256. Without it the divide stays in the
   middle and the shared exposure shows. */
(function () {
  'use strict';
  var figures = document.querySelectorAll('figure.compare');
  Array.prototype.forEach.call(figures, function (fig) {
    var stage = fig.querySelector('.stage');
    var range = fig.querySelector('input.divide');
    function place() {
      stage.style.setProperty('--pos', range.value + '%');
      range.setAttribute('aria-valuetext', 'divide at ' + range.value + '% of the width');
    }
    // The left layer's copy of the first right-hand picture is written once, in the right layer.
    Array.prototype.forEach.call(fig.querySelectorAll('.left-layer img[data-copy]'), function (im) {
      var mode = im.classList.contains('adapted') ? 'adapted' : 'shared';
      var source = fig.querySelector('.after-layer img.' + mode);
      if (source) {
        im.src = source.src;
        im.removeAttribute('data-copy');
      }
    });
    var left = fig.querySelector('select.pick-left');
    var right = fig.querySelector('select.pick-right');
    function label(select) { return select.options[select.selectedIndex].text; }
    function pick() {
      Array.prototype.forEach.call(fig.querySelectorAll('.left-layer img'), function (im) {
        im.hidden = im.getAttribute('data-setup') !== left.value;
      });
      Array.prototype.forEach.call(fig.querySelectorAll('.after-layer img'), function (im) {
        var mode = im.classList.contains('adapted') ? 'adapted' : 'shared';
        var source = fig.querySelector('.left-layer img.' + mode + '[data-setup="' + right.value + '"]');
        if (source) {
          im.src = source.src;
          im.alt = source.alt;
          im.setAttribute('data-setup', right.value);
        }
      });
      fig.querySelector('.tag-before').textContent = label(left);
      fig.querySelector('.tag-after').textContent = label(right);
    }
    if (left && right) {
      left.addEventListener('change', pick);
      right.addEventListener('change', pick);
      pick();
    }
    range.addEventListener('input', place);
    range.addEventListener('change', place);
    place();
    Array.prototype.forEach.call(fig.querySelectorAll('input[type=radio]'), function (radio) {
      radio.addEventListener('change', function () {
        if (radio.checked) { fig.setAttribute('data-exposure', radio.value); }
      });
      if (radio.checked) { fig.setAttribute('data-exposure', radio.value); }
    });
  });
}());
