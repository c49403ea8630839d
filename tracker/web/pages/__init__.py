"""One module per page, each exposing ``routes`` (a list of starlette Route); tracker.web.app mounts them."""
