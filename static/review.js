// Review mode of the page. Asks the server who is looking (owner or read-only
// reviewer of a shared dashboard), shows the read-only banner to reviewers,
// puts `readOnly: true` in the store so editing code saves nothing, disables
// every control marked `data-edits-cell`, and starts the comments panel.
// Panels may set or remove the mark as what a control does changes (the
// target fields edit the cell only while a cell target is selected): a
// control disabled here is enabled again when it loses the mark.
// The server refuses reviewers' changes whatever the page does (403).

import { element } from "./panels/fields.js";
import { createCommentsPanel } from "./panels/comments.js";

const BANNER_TEXT =
  "Read-only review: look around, run checks and add comments. Changes to the cell are made by its owner.";

const LOCKED = "data-review-locked";

/** Disable the controls marked `data-edits-cell`; enable again those locked here that lost the mark. */
function disableEditing(root) {
  for (const control of root.querySelectorAll("[data-edits-cell]")) {
    if (!control.hasAttribute(LOCKED)) {
      control.setAttribute(LOCKED, control.hasAttribute("disabled") ? "kept" : "");
      control.setAttribute("disabled", "");
      control.setAttribute("aria-disabled", "true");
    }
  }
  for (const control of root.querySelectorAll(`[${LOCKED}]:not([data-edits-cell])`)) {
    if (control.getAttribute(LOCKED) !== "kept") {
      control.removeAttribute("disabled");
    }
    control.removeAttribute("aria-disabled");
    control.removeAttribute(LOCKED);
  }
}

/**
 * @param {{store: object, api: object, banner: HTMLElement, commentsContainer: HTMLElement}} options
 * @returns {Promise<{role: string, readOnly: boolean}>}
 */
export async function startReview({ store, api, banner, commentsContainer }) {
  let access;
  try {
    access = await api.reviewAccess();
  } catch (error) {
    // without an answer, stay read-only: the server decides anyway
    access = { role: "reviewer", shared: true, can_edit: false, comments_enabled: false };
    commentsContainer.append(element("p", { className: "pb-note", text: error.message }));
  }
  const readOnly = !access.can_edit;
  document.body.dataset.review = access.role;
  store.update({ readOnly, reviewerCaps: access.reviewer_caps || null });
  if (readOnly) {
    const leave = element("button", {
      text: "Leave review",
      attributes: { type: "button", title: "Forget this browser's review link" },
    });
    leave.addEventListener("click", async () => {
      await api.leaveReview().catch(() => null);
      window.location.assign("/");
    });
    banner.replaceChildren(element("strong", { text: "Review" }), ` ${BANNER_TEXT} `, leave);
    banner.hidden = false;
    disableEditing(document);
    new MutationObserver(() => disableEditing(document)).observe(document.body, {
      childList: true,
      subtree: true,
      attributes: true,
      attributeFilter: ["data-edits-cell"],
    });
  }
  createCommentsPanel({ container: commentsContainer, store, api, access });
  return { role: access.role, readOnly };
}
