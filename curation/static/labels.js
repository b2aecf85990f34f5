// The label page's print button (no inline scripts: the page's CSP forbids them).
document.addEventListener("click", function (event) {
  var target = event.target;
  if (target && target.closest && target.closest("[data-print]")) window.print();
});
