// Keyboard-first: "/" jumps to the page's search field unless you are already typing.
document.addEventListener("keydown", function (event) {
  if (event.key !== "/" || event.ctrlKey || event.metaKey || event.altKey) return;
  var target = event.target;
  if (target && (target.isContentEditable || /^(INPUT|TEXTAREA|SELECT)$/.test(target.tagName))) return;
  var field = document.querySelector("[data-search]");
  if (!field) return;
  event.preventDefault();
  field.focus();
  field.select();
});
