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
