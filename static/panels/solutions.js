// The inverse kinematics solutions of the target as a table: branch, limits,
// smallest margin and manipulability. Selecting a row moves the arm onto it.

import { element, onChoose } from "./fields.js";
import { branchHeading, sameBranch } from "../branches.js";
import { branchStyle } from "../palette.js";
import { formatJoint, formatNumber } from "../units.js";

/**
 * @param {{container: HTMLElement, store: object, actions: object, palette: object}} options
 */
export function createSolutionsPanel({ container, store, actions, palette }) {
  const body = element("div", { attributes: { id: "solutions" } });
  container.append(body);

  function isCurrent(solution, { joints, selectedBranch }) {
    return (
      sameBranch(solution, selectedBranch) &&
      solution.joints_deg.every((value, k) => Math.abs(value - joints[k]) < 1e-6)
    );
  }

  function render() {
    const state = store.get();
    const { ik } = state;
    if (!ik) {
      body.replaceChildren(element("p", { className: "pb-empty", text: "No target yet." }));
      return;
    }
    const { solutions, reason, ignored_components: ignored } = ik.result;
    if (solutions.length === 0) {
      body.replaceChildren(
        element("p", { className: "pb-empty", text: `No solution: ${reason || "not reachable"}.` }),
      );
      return;
    }
    const rows = solutions.map((solution) => {
      const style = branchStyle(palette, solution);
      const swatch = element("span", { className: "pb-swatch", text: style.glyph });
      swatch.style.color = style.color;
      const margin =
        solution.min_margin_deg === null
          ? "no limits"
          : `${formatJoint(solution.min_margin_deg, solution.min_margin_unit)} (${solution.min_margin_joint})`;
      const row = element(
        "tr",
        {
          className: "pb-solution",
          attributes: { tabindex: "0", "aria-selected": String(isCurrent(solution, state)) },
        },
        [
          element("td", {}, [swatch, ` ${solution.branch || "single branch"}`]),
          element("td", { text: solution.within_limits ? "yes" : "no" }),
          element("td", { className: "pb-num", text: margin }),
          element("td", { className: "pb-num", text: formatNumber(solution.manipulability, { decimals: 4 }) }),
        ],
      );
      onChoose(row, () => actions.selectSolution(solution));
      return row;
    });
    const head = element("tr", {}, [
      element("th", { text: branchHeading(solutions) }),
      element("th", { text: "Within limits" }),
      element("th", { text: "Smallest limit margin" }),
      element("th", { text: "Manipulability" }),
    ]);
    const children = [
      element("table", { className: "pb-solutions" }, [element("thead", {}, [head]), element("tbody", {}, rows)]),
    ];
    if (ignored.length) {
      children.push(
        element("p", { className: "pb-note", text: `This arm does not control: ${ignored.join(", ")}.` }),
      );
    }
    body.replaceChildren(...children);
  }

  store.subscribe(render, { keys: ["ik", "joints", "selectedBranch"] });
  render();
  return { render };
}
