// Convert page: show only the input fields of the chosen input form (was an inline script).
(function () {
  var select = document.getElementById("id_form");
  if (!select) return;
  function show() {
    document.querySelectorAll("fieldset[data-form]").forEach(function (fs) {
      fs.hidden = fs.getAttribute("data-form").split(" ").indexOf(select.value) < 0;
    });
  }
  select.addEventListener("change", show);
  show();
})();
