// The cell panel: the cell's title and file, whether edits are saved, and the
// list of targets, path waypoints and fixtures to select. A selected target or
// waypoint becomes the page's target; dragging it edits the cell. A selected
// fixture is dragged in the plan and elevation too, or typed here (its frame's
// position and yaw in the world); the targets on it move with it. The fixture
// fields always save into the cell, so they carry `data-edits-cell` (review.js
// disables them for reviewers).

import { fixtureSelection } from "../selection.js";
import { element, numberField, onChoose, showValue } from "./fields.js";

const FIXTURE_FIELDS = [
  { name: "x", unit: "mm", axis: 0 },
  { name: "y", unit: "mm", axis: 1 },
  { name: "z", unit: "mm", axis: 2 },
  { name: "yaw", unit: "deg", axis: 5 },
];

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

/** The list row a selection marks: a fixture's row whatever target the page still shows. */
function rowKey(selection) {
  return JSON.stringify(selection && selection.kind === "fixture" ? { kind: "fixture", name: selection.name } : selection);
}

/**
 * @param {{container: HTMLElement, store: object, actions: object, onShowCell: () => void,
 *          onRetrySave: () => void, onChooseChain: (links: object) => void,
 *          onChooseChainEnd: (toLink: string) => void}} options
 *   onShowCell: called by the "show the cell" button when another robot is shown;
 *   onRetrySave: called by "Save again", shown after a failed save (the move is kept);
 *   onAddMesh: called with a mesh file chosen with "Add mesh file" (also: drop it on the plan).
 *   onChooseChain: called with `{ from_link }` or `{ to_link }` chosen for a URDF robot's chain.
 *   onChooseChainEnd: called with the leaf link chosen for a robot that cannot load without one.
 */
export function createCellPanel({ container, store, actions, onShowCell, onRetrySave, onAddMesh, onChooseChain, onChooseChainEnd }) {
  // a URDF robot's chain start and end (robot.from_link / to_link of the cell): the links above
  // the end, and the leaf links below the start
  const chainStart = element("select", { attributes: { id: "chain-start", "data-edits-cell": "" } });
  chainStart.addEventListener("change", () => onChooseChain({ from_link: chainStart.value }));
  const chainEnd = element("select", { attributes: { id: "chain-end", "data-edits-cell": "" } });
  chainEnd.addEventListener("change", () => onChooseChain({ to_link: chainEnd.value }));
  const chainRow = element("label", { attributes: { hidden: "" } }, ["Robot chain from ", chainStart, " to ", chainEnd]);
  const options = (names) => names.map((name) => element("option", { text: name, attributes: { value: name } }));
  function renderChain() {
    const { robot, cell, cellActive } = store.get();
    const ends = robot && robot.chain_ends ? robot.chain_ends : [];
    const starts = robot && robot.chain_starts ? robot.chain_starts : [];
    const show = Boolean(cellActive && cell && cell.cell.robot.file && (ends.length > 1 || starts.length > 1));
    chainRow.hidden = !show;
    if (show) {
      chainStart.replaceChildren(...options(starts));
      chainStart.value = robot.from_link;
      chainEnd.replaceChildren(...options(ends.length ? ends : [robot.to_link]));
      chainEnd.value = robot.to_link;
    }
  }
  store.subscribe(renderChain, { keys: ["robot", "cell", "cellActive"] });
  // a cell whose URDF robot cannot load until its chain end is chosen: the leaf links to pick
  const leafChoice = element("select", { attributes: { id: "chain-choice" } });
  const useLeaf = element("button", { text: "Use this chain end", attributes: { type: "button", id: "chain-choice-use" } });
  useLeaf.addEventListener("click", () => onChooseChainEnd(leafChoice.value));
  const leafNote = element("span", { attributes: { id: "chain-choice-note" } });
  const leafRow = element("div", { className: "pb-note", attributes: { id: "chain-choice-row", hidden: "" } }, [
    leafNote,
    leafChoice,
    useLeaf,
  ]);
  function renderChainChoice() {
    const { chainChoice } = store.get();
    leafRow.hidden = !chainChoice;
    if (chainChoice) {
      leafNote.textContent = `${chainChoice.robot_file} has several leaf links: choose where the robot's chain ends `;
      leafChoice.replaceChildren(...options(chainChoice.leaves));
    }
  }
  store.subscribe(renderChainChoice, { keys: ["chainChoice"] });
  const info = element("p", { className: "pb-note", attributes: { id: "cell-info" } });
  const saveState = element("output", { className: "pb-save", attributes: { id: "cell-save", role: "status" } });
  const back = element("button", { text: "Show the cell", attributes: { type: "button", id: "cell-show" } });
  back.addEventListener("click", onShowCell);
  const retry = element("button", { text: "Save again", attributes: { type: "button", id: "cell-save-retry", hidden: "" } });
  retry.addEventListener("click", onRetrySave);
  const list = element("div", { className: "pb-cell-list", attributes: { id: "cell-items", role: "listbox", "aria-label": "Targets, path waypoints and fixtures" } });
  const fixtureFields = FIXTURE_FIELDS.map(({ name, unit, axis }) => {
    const field = numberField({
      name,
      unit,
      id: `fixture-${name}`,
      onCommit: (value) => {
        const { fixture } = store.get();
        if (!fixture) {
          return;
        }
        const pose = [...fixture.position_mm, ...fixture.rpy_deg];
        pose[axis] = value;
        actions.setFixture({ ...fixture, position_mm: pose.slice(0, 3), rpy_deg: pose.slice(3) });
      },
    });
    field.input.setAttribute("data-edits-cell", "");
    return field;
  });
  const fixtureTitle = element("p", { className: "pb-note", attributes: { id: "fixture-title" } });
  const fixturePanel = element("div", { className: "pb-fixture-fields", attributes: { id: "fixture-fields", hidden: "" } }, [
    fixtureTitle,
    element("div", { className: "pb-fields" }, fixtureFields.map((field) => field.label)),
  ]);
  const meshInput = element("input", {
    attributes: { type: "file", id: "mesh-file", accept: ".stl,.obj,.ply,.glb,.gltf,.dae,.step,.stp", hidden: "" },
  });
  const addMesh = element("button", {
    text: "Add mesh file",
    attributes: { type: "button", id: "mesh-add", "data-edits-cell": "", title: "A CAD mesh (STL, OBJ, PLY, glTF, COLLADA, STEP) as a new fixture; or drop the file on the plan" },
  });
  addMesh.addEventListener("click", () => meshInput.click());
  meshInput.addEventListener("change", () => {
    for (const file of meshInput.files) {
      onAddMesh(file);
    }
    meshInput.value = "";
  });
  container.append(element("div", { className: "pb-controls" }, [info, saveState, retry, back, addMesh, meshInput, chainRow]), leafRow, list, fixturePanel);
  let builtFor = null;
  let markedFor = null;

  function item({ text, detail, selection, id }) {
    const row = element("div", { className: "pb-cell-item", attributes: { role: "option", tabindex: "0", id, "aria-selected": "false" } }, [
      element("span", { text }),
      element("span", { className: "pb-hint", text: detail }),
    ]);
    row.dataset.key = rowKey(selection);
    onChoose(row, () => actions.select(selection.kind === "fixture" ? fixtureSelection(store.get(), selection.name) : selection));
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
    rows.push(element("h4", { text: `Fixtures (${scene.fixtures.length})` }));
    for (const fixture of scene.fixtures) {
      rows.push(item({
        text: fixture.name,
        detail: `${fixture.shape} on ${fixture.parent || "world"}`,
        selection: { kind: "fixture", name: fixture.name },
        id: `cell-fixture-${fixture.name}`,
      }));
    }
    list.replaceChildren(...rows);
  }

  /** The selected fixture's fields: its frame in the world as on the page. */
  function renderFixture() {
    const { fixture, selection, cellActive } = store.get();
    const shown = Boolean(cellActive && fixture && selection && selection.kind === "fixture");
    fixturePanel.hidden = !shown;
    if (!shown) {
      return;
    }
    fixtureTitle.textContent = `Fixture ${fixture.name}: frame origin and yaw in the world; the targets on it move with it`;
    const pose = [...fixture.position_mm, ...fixture.rpy_deg];
    FIXTURE_FIELDS.forEach(({ axis }, k) => showValue(fixtureFields[k].input, pose[axis], axis < 3 ? 1 : 2));
  }

  function render() {
    const { cell, cellActive, selection, cellSave } = store.get();
    if (!cell) {
      info.textContent = "No cell.";
      return;
    }
    // the file's name only; its folder (the owner's) is a tooltip for the owner
    const where = cell.file_name ? `file ${cell.file_name}` : "bundled demo cell, edits kept in memory";
    info.textContent = `${cell.cell.title || "Cell"} — ${where}`;
    info.title = cell.path || "";
    saveState.textContent = cellSave.message || "saved";
    saveState.dataset.state = cellSave.state;
    saveState.title = cellSave.message || "";
    retry.hidden = !cellSave.retry;
    back.hidden = cellActive;
    const key = `${cell.etag}|${cellActive}`;
    const rebuilt = builtFor !== key;
    if (rebuilt) {
      build(cell);
      builtFor = key;
    }
    list.classList.toggle("pb-disabled", !cellActive);
    const selected = rowKey(selection);
    if (selected !== markedFor || rebuilt) {
      markedFor = selected;
      for (const row of list.querySelectorAll(".pb-cell-item")) {
        row.setAttribute("aria-selected", String(row.dataset.key === selected));
      }
    }
  }

  store.subscribe(render, { keys: ["cell", "cellActive", "selection", "cellSave"] });
  store.subscribe(renderFixture, { keys: ["fixture", "selection", "cellActive"] });
  return { render };
}
