"""The page's kernel-loading note (static/kernels.js): what GET /api/health says, shown in the
status area until every kernel is loaded, then hidden."""

from __future__ import annotations

from typing import Any

_WITH_FAKE_SERVER = """async () => {
  const { createKernelProgress } = await import("/static/kernels.js");
  const probe = { states: [], finish: null };
  window.kernelProbe = probe;
  const element = document.createElement("output");
  element.id = "kernel-probe";
  document.body.append(element);
  const loading = { kernels_ready: false, kernels_done: 1, kernels_total: 3,
                    kernels_current: "clearance and joint maps" };
  const ready = { kernels_ready: true, kernels_done: 3, kernels_total: 3, kernels_current: null };
  let asked = 0;
  const api = {
    health: () => {
      asked += 1;
      if (asked === 1) return Promise.resolve(loading);
      return new Promise((resolve) => { probe.finish = () => resolve(ready); });
    },
  };
  const store = { update: (patch) => probe.states.push(patch.kernels) };
  createKernelProgress({ api, store, element });
}"""


def test_kernel_note_shows_progress_until_loaded_then_hides(open_page: Any) -> None:
    page = open_page.page
    page.evaluate(_WITH_FAKE_SERVER)
    page.wait_for_function("() => window.kernelProbe.states.length === 1")
    probe = page.locator("#kernel-probe")
    # our own contract: step done + 1 of total, and the step's name, while loading
    assert probe.inner_text() == "compiling kernels 2/3: clearance and joint maps…"
    assert probe.is_visible()
    page.wait_for_function("() => typeof window.kernelProbe.finish === 'function'")
    page.evaluate("() => window.kernelProbe.finish()")
    page.wait_for_function("() => window.kernelProbe.states.length === 2")
    assert page.evaluate("() => window.kernelProbe.states[1].ready") is True
    assert probe.is_hidden()


def test_page_hides_the_kernel_note_when_the_server_has_loaded_them(open_page: Any) -> None:
    page = open_page.page
    page.wait_for_function(
        "() => { const s = window.posebridge.getState(); return Boolean(s.kernels && s.kernels.ready); }",
        timeout=600_000,
    )
    kernels = page.evaluate("() => window.posebridge.getState().kernels")
    assert kernels["done"] == kernels["total"]  # every step ran (GET /api/health)
    assert page.locator("#kernel-progress").is_hidden()
    assert open_page.problems.console_errors == []
