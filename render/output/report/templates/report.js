/* The report's before/after slider and exposure switch (render.output.report): inlined in the
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
