"""The page's scripts as served: plotly.js with V8's compile hint, and the module preload list."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import httpx
import pytest

from posebridge.api.app import plotly_script_path
from posebridge.api.page_modules import page_modules
from posebridge.compile_hint import COMPILE_HINT
from posebridge.resources import data_folder

pytestmark = pytest.mark.anyio

STATIC = data_folder("static")


async def test_plotly_script_is_the_vendored_file_after_the_compile_hint(
    client: httpx.AsyncClient,
) -> None:
    response = await client.get("/vendor/plotly.min.js")
    assert response.status_code == 200
    assert response.headers["content-type"].startswith("text/javascript")
    # the magic comment must be the script's first line (V8 blog, explicit compile hints)
    assert response.content.startswith(b"//# allFunctionsCalledOnLoad\n")
    rest = response.content[len(COMPILE_HINT) :]
    assert rest == plotly_script_path().read_bytes()
    # the npm package's file, unchanged: its SHA-256 as static/vendor/README.md records it
    readme = (STATIC / "vendor" / "README.md").read_text(encoding="utf-8")
    assert hashlib.sha256(rest).hexdigest() in readme
    assert response.headers["etag"]
    assert response.headers["last-modified"]


def _write(folder: Path, name: str, text: str) -> None:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")


def test_page_modules_follows_static_imports_breadth_first(tmp_path: Path) -> None:
    _write(
        tmp_path, "main.js", 'import { a } from "./a.js";\nimport {\n  b,\n} from "./views/b.js";\n'
    )
    _write(tmp_path, "a.js", 'export { c } from "./c.js";\n// import("./not-a-static-import.js")\n')
    _write(tmp_path, "views/b.js", 'import "../c.js";\nimport { a } from "../a.js";\n')
    _write(tmp_path, "c.js", "export const c = 1;\n")
    # worked by hand from the four files: each module once, in the order it is first reached
    assert page_modules(tmp_path) == ["main.js", "a.js", "views/b.js", "c.js"]


async def test_page_preloads_every_module_of_the_page(client: httpx.AsyncClient) -> None:
    page = (await client.get("/")).text
    preloaded = re.findall(r'<link rel="modulepreload" href="[^"]*/static/([^"]+)">', page)
    modules = {
        str(path.relative_to(STATIC).as_posix())
        for path in STATIC.rglob("*.js")
        if "vendor" not in path.parts
    }
    # our own contract: every module under static/ is reached from main.js, and each one the
    # entry imports (all but main.js itself, the page's script) is preloaded once
    assert set(page_modules(STATIC)) == modules
    assert sorted(preloaded) == sorted(modules - {"main.js"})
