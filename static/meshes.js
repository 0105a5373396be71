// Mesh fixtures on the page: their triangles fetched once per content version
// (kept in the store as `meshes`), and mesh files dropped onto the plan (or
// chosen with the cell panel's button) uploaded as new fixtures.

import { REVIEW_NOT_SAVED } from "./cellsync.js";

/** Triangles per mesh for the plan and elevation silhouettes (the 3D view gets the page budget). */
export const FLAT_TRIANGLES = 3000;
/** File endings the server reads (POST /api/cell/meshes). */
export const MESH_ENDINGS = [".stl", ".obj", ".ply", ".glb", ".gltf", ".dae", ".step", ".stp"];

/** Whether a file name ends in a mesh format the server reads. */
export function isMeshFile(name) {
  const lower = name.toLowerCase();
  return MESH_ENDINGS.some((ending) => lower.endsWith(ending));
}

/** The bytes of a File as base64 text. */
export async function fileBase64(file) {
  const bytes = new Uint8Array(await file.arrayBuffer());
  let binary = "";
  const chunk = 0x8000;
  for (let k = 0; k < bytes.length; k += chunk) {
    binary += String.fromCharCode(...bytes.subarray(k, k + chunk));
  }
  return btoa(binary);
}

/**
 * @param {{store: object, api: object, actions: object, cellSync: object}} options
 *   cellSync: shows the cell document the server answers to an upload (cellsync.js owns `cell`).
 */
export function createMeshFixtures({ store, api, actions, cellSync }) {
  const loading = new Set();

  async function load(shape) {
    const key = `${shape.name}|${shape.mesh_version}`;
    if (loading.has(key)) {
      return;
    }
    loading.add(key);
    try {
      const [full, flat] = await Promise.all([
        api.meshDrawing(shape.name),
        api.meshDrawing(shape.name, Math.min(FLAT_TRIANGLES, Math.max(100, shape.triangles))),
      ]);
      const meshes = { ...store.get().meshes, [shape.name]: { mesh_version: shape.mesh_version, full, flat } };
      store.update({ meshes });
    } catch (error) {
      actions.setStatus("error", `Mesh ${shape.name}: ${error.message}`);
    } finally {
      loading.delete(key);
    }
  }

  function sync(state) {
    const shapes = state.cell ? state.cell.scene.shapes.filter((s) => s.shape === "mesh") : [];
    for (const shape of shapes) {
      const have = state.meshes[shape.name];
      if (!have || have.mesh_version !== shape.mesh_version) {
        load(shape);
      }
    }
  }
  store.subscribe(sync, { keys: ["cell"] });

  /** Upload a mesh file as a new fixture with its bounding box's bottom centre at `position_mm`. */
  async function upload(file, position_mm) {
    const { cell, readOnly } = store.get();
    if (readOnly) {
      actions.setStatus("info", REVIEW_NOT_SAVED);
      return;
    }
    if (!cell || !isMeshFile(file.name)) {
      actions.setStatus("warn", `${file.name}: not a mesh file (${MESH_ENDINGS.join(", ")})`);
      return;
    }
    actions.setStatus("info", `Uploading ${file.name} ...`);
    try {
      const body = { file_name: file.name, data_base64: await fileBase64(file), position_mm };
      const document = await api.uploadMesh(body, cell.etag);
      const added = document.cell.fixtures[document.cell.fixtures.length - 1];
      cellSync.showSavedCell(document, `Added mesh fixture ${added.name}`);
      actions.setStatus("info", `Added mesh fixture ${added.name} from ${file.name}`);
    } catch (error) {
      actions.setStatus("error", `Adding ${file.name}: ${error.message}`);
    }
  }

  return { upload };
}
