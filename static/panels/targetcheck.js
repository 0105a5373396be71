// Target check panel: every target reachable or why not, the recommended
// branch and why, whether one branch reaches them all (and which targets break
// it), and the findings, errors first (a target moved off its fixture among them). It runs again whenever the cell changes, so
// a target dragged onto the consistent branch is seen to fix its finding.
// Clicking a row or a finding selects its target.

import { element } from "./fields.js";

const RUN_DELAY_MS = 250;

/**
 * @param {{container: HTMLElement, store: object, actions: object, api: object}} options
 */
export function createTargetCheckPanel({ container, store, actions, api }) {
  const summary = element("p", { className: "pb-note", attributes: { id: "target-check-summary" } });
  const table = element("div", { attributes: { id: "target-check-table" } });
  const findings = element("ul", { className: "pb-findings", attributes: { id: "target-check-findings" } });
  container.append(summary, table, findings);
  let timer = null;
  let runFor = null;

  async function run() {
    timer = null;
    const { cell, cellActive } = store.get();
    if (!cell || !cellActive || runFor === cell.etag) {
      return;
    }
    const etag = cell.etag;
    summary.textContent = "Checking the targets…";
    try {
      const report = await api.targetCheck();
      if (store.get().cell && store.get().cell.etag === etag) {
        runFor = etag;
        store.update({ targetCheck: { etag, report } });
      }
    } catch (error) {
      summary.textContent = `Target check failed: ${error.message}`;
    }
  }

  function findingRow(finding) {
    const row = element("li", { attributes: { "data-severity": finding.severity, "data-code": finding.code, tabindex: "0" } }, [
      element("span", { className: "pb-severity", text: finding.severity }),
      ` ${finding.target ? `${finding.target}: ` : ""}${finding.message}`,
    ]);
    if (finding.target) {
      row.addEventListener("click", () => actions.select({ kind: "target", name: finding.target }));
    }
    return row;
  }

  function render() {
    const { targetCheck, cell } = store.get();
    if (!targetCheck || !cell || targetCheck.etag !== cell.etag) {
      return;
    }
    const { report } = targetCheck;
    const consistent = report.consistent_branch;
    const branchText = consistent.consistent
      ? `one branch reaches every target: ${consistent.branch}`
      : `no single branch reaches every target; ${consistent.branch || "none"} misses ${consistent.breaking_targets.join(", ")}`;
    summary.textContent = `${report.reachable_count} of ${report.targets.length} targets reachable; ${branchText}. ` +
      `${report.error_count} errors, ${report.warning_count} warnings.`;
    summary.dataset.consistent = String(consistent.consistent);
    const rows = report.targets.map((target) => {
      const breaking = consistent.breaking_targets.includes(target.name);
      const row = element("tr", { attributes: { tabindex: "0", "data-target": target.name, "data-breaking": String(breaking) } }, [
        element("td", { text: target.name }),
        element("td", { text: target.reachable ? "yes" : `no: ${target.target.reason}` }),
        element("td", {}, [
          target.target.recommended_branch || "–",
          ...(target.target.recommended_reason ? [element("div", { className: "pb-why", text: target.target.recommended_reason })] : []),
        ]),
        element("td", { text: target.required_branch || "any" }),
        element("td", { text: breaking ? "breaks it" : "on it" }),
      ]);
      row.addEventListener("click", () => actions.select({ kind: "target", name: target.name }));
      return row;
    });
    table.replaceChildren(
      element("table", { className: "pb-solutions" }, [
        element("thead", {}, [
          element("tr", {}, ["Target", "Reachable", "Recommended branch (why)", "Required", "Common branch"].map((text) => element("th", { text }))),
        ]),
        element("tbody", {}, rows),
      ]),
    );
    findings.replaceChildren(...report.findings.map(findingRow));
  }

  store.subscribe(
    () => {
      if (timer !== null) {
        clearTimeout(timer);
      }
      timer = setTimeout(run, RUN_DELAY_MS);
    },
    { keys: ["cell", "cellActive"] },
  );
  store.subscribe(render, { keys: ["targetCheck", "cell"] });
  return { render };
}
