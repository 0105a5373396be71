// Target pose panel: typed position (mm) and orientation (deg), nudge step,
// snapping, and whether the arm follows the target. While a cell target or a
// pose waypoint is selected, the typed values and "Target ← tool" move it in
// the cell (saved), so they carry `data-edits-cell` then (review.js disables
// them for reviewers).

import { movedItem } from "../selection.js";
import { element, numberField, showValue } from "./fields.js";

const STEPS_MM = [1, 5, 10, 25, 50, 100];
const STEPS_DEG = [1, 5, 15, 45];
const NAMES = ["x", "y", "z", "roll", "pitch", "yaw"];

/**
 * @param {{container: HTMLElement, store: object, actions: object}} options
 */
export function createTargetPanel({ container, store, actions }) {
  const fields = NAMES.map((name, index) =>
    numberField({
      name,
      unit: index < 3 ? "mm" : "deg",
      id: `target-${name}`,
      onCommit: (value) => {
        const { target } = store.get();
        if (!target) {
          return;
        }
        const position = [...target.position_mm];
        const rpy = [...target.rpy_deg];
        if (index < 3) {
          position[index] = value;
        } else {
          rpy[index - 3] = value;
        }
        actions.setTarget({ position_mm: position, rpy_deg: rpy });
      },
    }),
  );

  const stepMm = element("select", { attributes: { id: "step-mm", "aria-label": "Position step" } });
  stepMm.append(...STEPS_MM.map((step) => new Option(`${step} mm`, String(step))));
  stepMm.addEventListener("change", () => actions.setStep({ stepMm: Number(stepMm.value) }));
  const stepDeg = element("select", { attributes: { id: "step-deg", "aria-label": "Angle step" } });
  stepDeg.append(...STEPS_DEG.map((step) => new Option(`${step} deg`, String(step))));
  stepDeg.addEventListener("change", () => actions.setStep({ stepDeg: Number(stepDeg.value) }));

  const snap = element("input", { attributes: { type: "checkbox", id: "snap" } });
  snap.addEventListener("change", () => actions.setSnap(snap.checked));
  const follow = element("input", { attributes: { type: "checkbox", id: "follow" } });
  follow.addEventListener("change", () => actions.setFollow(follow.checked));
  const reach = element("input", { attributes: { type: "checkbox", id: "show-reach" } });
  reach.addEventListener("change", () => actions.setShowReach(reach.checked));
  const capsules = element("input", { attributes: { type: "checkbox", id: "show-capsules" } });
  capsules.addEventListener("change", () => actions.setShowCapsules(capsules.checked));
  const fromTool = element("button", { text: "Target ← tool", attributes: { type: "button", id: "target-from-tool" } });
  fromTool.title = "Put the target on the current tool pose";
  fromTool.addEventListener("click", () => actions.targetFromTool());

  container.append(
    element("div", { className: "pb-fields" }, fields.map((field) => field.label)),
    element("div", { className: "pb-controls" }, [
      element("label", { text: "Step " }, [stepMm]),
      element("label", { text: "Angle step " }, [stepDeg]),
      element("label", {}, [snap, " Snap drags to the step grid"]),
      element("label", {}, [follow, " Arm follows the target"]),
      element("label", { attributes: { title: "Tool directions reached per cell, in slices through the target" } }, [reach, " Reach in plan and elevation"]),
      element("label", { attributes: { title: "The collision capsules fitted to the robot's meshes, which clearance uses" } }, [capsules, " Fitted capsules instead of meshes"]),
      fromTool,
    ]),
  );

  function render() {
    const { target, stepMm: mm, stepDeg: deg, snap: snapOn, follow: followOn } = store.get();
    if (target) {
      [...target.position_mm, ...target.rpy_deg].forEach((value, index) =>
        showValue(fields[index].input, value, index < 3 ? 1 : 2),
      );
    }
    stepMm.value = String(mm);
    stepDeg.value = String(deg);
    snap.checked = snapOn;
    follow.checked = followOn;
    reach.checked = store.get().showReach;
    capsules.checked = store.get().showCapsules;
    capsules.disabled = !store.get().robotMeshes.length;
  }

  /** Mark the controls that would save into the cell: a cell target or pose waypoint is selected. */
  function markEdits() {
    const state = store.get();
    const saves = state.cellActive && movedItem(state) !== null;
    for (const control of [...fields.map((field) => field.input), fromTool]) {
      control.toggleAttribute("data-edits-cell", saves);
    }
  }

  store.subscribe(render, { keys: ["target", "stepMm", "stepDeg", "snap", "follow", "showReach", "showCapsules", "robotMeshes"] });
  store.subscribe(markEdits, { keys: ["cell", "cellActive", "selection"] });
  render();
  markEdits();
  return { render };
}
