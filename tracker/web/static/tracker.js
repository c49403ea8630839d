// Sends the page's CSRF token with every htmx request (read from <meta name="csrf-token">).
// Kept in a file: the Content-Security-Policy allows no inline script.
document.addEventListener("htmx:configRequest", function (event) {
  var meta = document.querySelector('meta[name="csrf-token"]');
  if (meta) {
    event.detail.headers["X-CSRF-Token"] = meta.getAttribute("content");
  }
});

// A form sent back with errors beside its fields (status 400) replaces the form, like a success.
document.addEventListener("htmx:beforeSwap", function (event) {
  if (event.detail.xhr.status === 400) {
    event.detail.shouldSwap = true;
    event.detail.isError = false;
  }
});

// Every date field shows the format the server reads (ISO 8601), since browsers render date
// inputs in their own locale; a template may already give it (a .fmt element named by
// aria-describedby). The server's parser stays the one check of what was typed.
function addDateFormats(root) {
  var inputs = (root || document).querySelectorAll('input[type="date"]');
  for (var i = 0; i < inputs.length; i++) {
    var input = inputs[i];
    var next = input.nextElementSibling;
    if (next && next.classList.contains("fmt")) {
      continue;
    }
    var help = document.createElement("span");
    help.className = "fmt";
    help.textContent = "YYYY-MM-DD";
    if (input.id) {
      help.id = "fmt-" + input.id;
      var described = input.getAttribute("aria-describedby");
      input.setAttribute("aria-describedby", (described ? described + " " : "") + help.id);
    }
    input.insertAdjacentElement("afterend", help);
  }
}
document.addEventListener("DOMContentLoaded", function () { addDateFormats(document); });
document.addEventListener("htmx:afterSwap", function () { addDateFormats(document); });
