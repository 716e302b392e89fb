"""The schema page: Swagger UI served from the installed package, so it renders with no internet.

One plugin of our own (``FigureAnswers``): Swagger UI shows an ``image/svg+xml`` answer as XML
text (its XML rule comes before its image rule), so "Try it out" with that media type would show
the figure's source, not the figure. The plugin wraps the response body: an SVG answer is shown
as an image (an ``<img>`` of a blob URL, so nothing in the SVG runs), anything else as before.
"""

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
function FigureAnswers() {{
  return {{
    wrapComponents: {{
      responseBody: (Original, system) => (props) => {{
        const type = String(props.contentType || "").toLowerCase();
        if (type.startsWith("image/svg+xml") && props.content) {{
          const blob = props.content instanceof Blob ? props.content : new Blob([props.content], {{type: "image/svg+xml"}});
          const h = system.React.createElement;
          return h("div", null, h("h5", null, "Response body"),
                   h("img", {{src: window.URL.createObjectURL(blob), alt: "figure of the answer",
                             className: "figure-answer", style: {{maxWidth: "100%", background: "white"}}}}));
        }}
        return system.React.createElement(Original, props);
      }}
    }}
  }};
}}
window.ui = SwaggerUIBundle({{
  url: "/openapi.json",
  dom_id: "#swagger-ui",
  deepLinking: true,
  presets: [SwaggerUIBundle.presets.apis, SwaggerUIStandalonePreset],
  plugins: [FigureAnswers],
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
