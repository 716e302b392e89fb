"""The schema page: Swagger UI served from the installed package, so it renders with no internet."""

from __future__ import annotations

from litestar import Response, get
from litestar.static_files import create_static_files_router
from swagger_ui_bundle import swagger_ui_path

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


assets_router = create_static_files_router(
    path=ASSETS, directories=[swagger_ui_path], include_in_schema=False
)
