"""The schema page: Swagger UI served from the installed package, so it renders with no internet."""

from __future__ import annotations

import os

from litestar import Response, get
from litestar.params import FromPath
from litestar.response import File
from swagger_ui_bundle import swagger_ui_path

from tailgauge.api.problems import ApiProblem
from tailgauge.api.schemas import ProblemLocation

ASSETS = "/docs/assets"

_PAGE = f"""<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Tailgauge API</title>
<link rel="stylesheet" href="{ASSETS}/swagger-ui.css">
<link rel="icon" type="image/png" href="{ASSETS}/favicon-32x32.png">
</head>
<body>
<div id="swagger-ui"></div>
<script src="{ASSETS}/swagger-ui-bundle.js"></script>
<script src="{ASSETS}/swagger-ui-standalone-preset.js"></script>
<script>
window.ui = SwaggerUIBundle({{
  url: "/openapi.json",
  dom_id: "#swagger-ui",
  deepLinking: true,
  presets: [SwaggerUIBundle.presets.apis, SwaggerUIStandalonePreset],
  layout: "BaseLayout"
}});
</script>
</body>
</html>
""".encode()


@get("/docs", include_in_schema=False, sync_to_thread=False)
def schema_page() -> Response[bytes]:
    return Response(_PAGE, media_type="text/html")


# The bundle's files by name, listed once: a request names one of them or gets a 404, so no part
# of a URL ever reaches the filesystem (a NUL, "..", or a name longer than the system allows
# used to surface as a 500 from the path lookup).
_BUNDLE = {
    entry.name: entry.path for entry in os.scandir(swagger_ui_path) if entry.is_file(follow_symlinks=False)
}


@get(f"{ASSETS}/{{name:str}}", include_in_schema=False, sync_to_thread=False)
def asset(name: FromPath[str]) -> File:
    path = _BUNDLE.get(name)
    if path is None:
        raise ApiProblem(
            "not-found",
            "no such file among the schema page's assets",
            [ProblemLocation(path="path", message="not a file of the schema page's bundle")],
        )
    return File(path, filename=name, content_disposition_type="inline")
