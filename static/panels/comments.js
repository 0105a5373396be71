// Reviewer comments: the list (newest last) and a form to add one, pinned to
// the cell, a target or a path waypoint. The owner can mark comments
// resolved; reviewers of a shared dashboard can only add. Comment texts are
// always shown with textContent, never as markup.
//
// The pin choices come from the cell document in the store (`cell`: the page
// reads GET /api/cell once, static/main.js); until it is there the only pin is
// the whole cell, and the comments are listed without waiting for it. The
// store's `selection` — {kind: "target", name} or {kind: "waypoint", path,
// index} — is preselected, so a new comment is pinned to what is selected.

import { element } from "./fields.js";

const MAX_AUTHOR_CHARS = 80;
const MAX_TEXT_CHARS = 4000;
const AUTHOR_KEY = "posebridge.review.author";

function pinValue(pin) {
  if (pin.kind === "target") {
    return JSON.stringify({ kind: "target", target: pin.target });
  }
  if (pin.kind === "waypoint") {
    return JSON.stringify({ kind: "waypoint", path: pin.path, waypoint: pin.waypoint });
  }
  return JSON.stringify({ kind: "cell" });
}

function pinFromSelection(selection) {
  if (selection && selection.kind === "target" && typeof selection.name === "string") {
    return { kind: "target", target: selection.name };
  }
  if (selection && selection.kind === "waypoint" && Number.isInteger(selection.index)) {
    return { kind: "waypoint", path: selection.path, waypoint: selection.index };
  }
  return null;
}

function rememberedAuthor() {
  try {
    return window.localStorage.getItem(AUTHOR_KEY) || "";
  } catch {
    return "";
  }
}

function rememberAuthor(name) {
  try {
    window.localStorage.setItem(AUTHOR_KEY, name);
  } catch {
    // storage may be disabled; the name is then asked again next time
  }
}

/**
 * @param {{container: HTMLElement, store: object, api: object,
 *          access: {role: string, comments_enabled: boolean}}} options
 */
export function createCommentsPanel({ container, store, api, access }) {
  const isOwner = access.role === "owner";
  const status = element("p", { className: "pb-note", attributes: { role: "status", "aria-live": "polite" } });
  const list = element("ol", { className: "pb-comments", attributes: { id: "comments-list" } });
  const pinSelect = element("select", { attributes: { id: "comment-pin", "aria-label": "Pin the comment to" } });
  const author = element("input", {
    attributes: { id: "comment-author", type: "text", maxlength: String(MAX_AUTHOR_CHARS), autocomplete: "name" },
  });
  author.value = rememberedAuthor();
  const text = element("textarea", {
    attributes: { id: "comment-text", rows: "3", maxlength: String(MAX_TEXT_CHARS) },
  });
  const send = element("button", { text: "Add comment", attributes: { type: "submit", id: "comment-send" } });
  const form = element("form", { className: "pb-comment-form", attributes: { id: "comment-form" } }, [
    element("label", { attributes: { for: "comment-pin" } }, [element("span", { text: "On" }), pinSelect]),
    element("label", { attributes: { for: "comment-author" } }, [element("span", { text: "Your name" }), author]),
    element("label", { attributes: { for: "comment-text" } }, [element("span", { text: "Comment" }), text]),
    send,
  ]);
  const showResolved = element("input", { attributes: { type: "checkbox", id: "comments-resolved" } });
  const filter = element("label", { className: "pb-check", attributes: { for: "comments-resolved" } }, [
    showResolved,
    " Show resolved",
  ]);
  container.append(form, filter, status, list);

  let comments = [];
  let pins = [{ kind: "cell" }];

  function say(message, level = "info") {
    status.textContent = message;
    status.dataset.level = level;
  }

  function renderPins() {
    const chosen = pinSelect.value;
    const options = pins.map((pin) => {
      const label =
        pin.kind === "target"
          ? `target ${pin.target}`
          : pin.kind === "waypoint"
            ? `path ${pin.path}, waypoint ${pin.waypoint + 1}`
            : "the whole cell";
      return new Option(label, pinValue(pin));
    });
    pinSelect.replaceChildren(...options);
    const fromSelection = pinFromSelection(store.get().selection);
    const wanted = fromSelection ? pinValue(fromSelection) : chosen;
    if (options.some((option) => option.value === wanted)) {
      pinSelect.value = wanted;
    }
  }

  function renderList() {
    const shown = comments.filter((comment) => showResolved.checked || !comment.resolved);
    const items = shown.map((comment) => {
      const head = element("div", { className: "pb-comment-head" }, [
        element("strong", { text: comment.author }),
        ` on ${comment.pin_label}${comment.pin_found ? "" : " (no longer in the cell)"} · ${comment.created_utc}`,
      ]);
      const body = element("p", { className: "pb-comment-text", text: comment.text });
      const children = [head, body];
      if (comment.resolved) {
        children.push(element("p", { className: "pb-note", text: `Resolved ${comment.resolved_utc}` }));
      }
      if (isOwner) {
        const toggle = element("button", {
          text: comment.resolved ? "Reopen" : "Mark resolved",
          attributes: { type: "button", "data-comment": String(comment.id) },
        });
        toggle.addEventListener("click", () => resolve(comment, !comment.resolved));
        children.push(toggle);
      }
      return element(
        "li",
        { className: comment.resolved ? "pb-comment pb-resolved" : "pb-comment", attributes: { "data-id": String(comment.id) } },
        children,
      );
    });
    list.replaceChildren(...items);
    const open = comments.filter((comment) => !comment.resolved).length;
    if (comments.length === 0) {
      say("No comments yet.");
    } else {
      say(`${open} open, ${comments.length - open} resolved.`);
    }
  }

  function pinsOf(cellDocument) {
    return [
      { kind: "cell" },
      ...cellDocument.cell.targets.map((target) => ({ kind: "target", target: target.name })),
      ...cellDocument.cell.paths.flatMap((path) =>
        path.waypoints.map((_, index) => ({ kind: "waypoint", path: path.name, waypoint: index })),
      ),
    ];
  }

  function followCell() {
    const { cell } = store.get();
    if (cell) {
      pins = pinsOf(cell);
      renderPins();
    }
  }

  async function refresh() {
    try {
      const answer = await api.listComments();
      comments = answer.comments;
      renderList();
    } catch (error) {
      say(error.message, "error");
    }
  }

  async function resolve(comment, resolved) {
    try {
      await api.resolveComment(comment.id, resolved);
      await refresh();
    } catch (error) {
      say(error.message, "error");
    }
  }

  form.addEventListener("submit", async (event) => {
    event.preventDefault();
    const name = author.value.trim();
    if (!name || !text.value.trim()) {
      say("Give your name and a comment.", "warn");
      return;
    }
    send.disabled = true;
    try {
      await api.addComment({ pin: JSON.parse(pinSelect.value), author: name, text: text.value });
      rememberAuthor(name);
      text.value = "";
      await refresh();
    } catch (error) {
      say(error.message, "error");
    } finally {
      send.disabled = false;
    }
  });
  showResolved.addEventListener("change", renderList);
  store.subscribe(renderPins, { keys: ["selection"] });
  store.subscribe(followCell, { keys: ["cell"] });
  renderPins();
  followCell();

  if (!access.comments_enabled) {
    form.hidden = true;
    filter.hidden = true;
    say("Comments need a cell file: start the server with --cell FILE to collect them.");
    return { refresh: async () => {} };
  }
  refresh();
  return { refresh };
}
