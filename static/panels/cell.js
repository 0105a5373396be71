// The cell panel: the cell's title and file, whether edits are saved, and the
// list of targets and path waypoints to select. The selected one becomes the
// page's target; dragging it edits the cell.

import { element, onChoose } from "./fields.js";

function branchText(branch) {
  if (!branch) {
    return "any branch";
  }
  return ["shoulder", "elbow", "wrist"].filter((part) => branch[part]).map((part) => `${part} ${branch[part]}`).join(", ");
}

function waypointText(waypoint) {
  const move = waypoint.motion === "linear" ? "linear move" : "joint move";
  if (waypoint.source === "target") {
    return `${waypoint.approach ? "above " : ""}${waypoint.target} (${move})`;
  }
  return `${waypoint.source === "joints" ? "joint values" : "pose"} (${move})`;
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, onShowCell: () => void}} options
 *   onShowCell: called by the "show the cell" button when another robot is shown.
 */
export function createCellPanel({ container, store, actions, onShowCell }) {
  const info = element("p", { className: "pb-note", attributes: { id: "cell-info" } });
  const saveState = element("output", { className: "pb-save", attributes: { id: "cell-save", role: "status" } });
  const back = element("button", { text: "Show the cell", attributes: { type: "button", id: "cell-show" } });
  back.addEventListener("click", onShowCell);
  const list = element("div", { className: "pb-cell-list", attributes: { id: "cell-items", role: "listbox", "aria-label": "Targets and path waypoints" } });
  container.append(element("div", { className: "pb-controls" }, [info, saveState, back]), list);
  let builtFor = null;
  let markedFor = null;

  function item({ text, detail, selection, id }) {
    const row = element("div", { className: "pb-cell-item", attributes: { role: "option", tabindex: "0", id, "aria-selected": "false" } }, [
      element("span", { text }),
      element("span", { className: "pb-hint", text: detail }),
    ]);
    row.dataset.key = JSON.stringify(selection);
    onChoose(row, () => actions.select(selection));
    return row;
  }

  function build(cell) {
    const { scene } = cell;
    const rows = [element("h4", { text: `Targets (${scene.targets.length})` })];
    for (const target of scene.targets) {
      rows.push(item({
        text: target.name,
        detail: `on ${target.fixture}; ${branchText(target.branch)}`,
        selection: { kind: "target", name: target.name },
        id: `cell-target-${target.name}`,
      }));
    }
    for (const path of scene.paths) {
      rows.push(element("h4", { text: `Path ${path.name} (${path.waypoints.length} waypoints)` }));
      path.waypoints.forEach((waypoint, index) => {
        rows.push(item({
          text: `${index + 1}. ${waypointText(waypoint)}`,
          detail: "",
          selection: { kind: "waypoint", path: path.name, index },
          id: `cell-waypoint-${path.name}-${index}`,
        }));
      });
    }
    list.replaceChildren(...rows);
  }

  function render() {
    const { cell, cellActive, selection, cellSave } = store.get();
    if (!cell) {
      info.textContent = "No cell.";
      return;
    }
    const where = cell.path ? `file ${cell.path}` : "bundled demo cell, edits kept in memory";
    info.textContent = `${cell.cell.title || "Cell"} — ${where}`;
    saveState.textContent = cellSave.message || "saved";
    saveState.dataset.state = cellSave.state;
    back.hidden = cellActive;
    const key = `${cell.etag}|${cellActive}`;
    const rebuilt = builtFor !== key;
    if (rebuilt) {
      build(cell);
      builtFor = key;
    }
    list.classList.toggle("pb-disabled", !cellActive);
    const selected = JSON.stringify(selection);
    if (selected !== markedFor || rebuilt) {
      markedFor = selected;
      for (const row of list.querySelectorAll(".pb-cell-item")) {
        row.setAttribute("aria-selected", String(row.dataset.key === selected));
      }
    }
  }

  store.subscribe(render, { keys: ["cell", "cellActive", "selection", "cellSave"] });
  return { render };
}
