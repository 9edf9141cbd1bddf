/** Shared by the browser tests of the live page and the report. */
import type { Page } from 'playwright-core';

/** Text boxes whose content is wider than the box (cut by an ellipsis, or running out of it). */
export function overflowing(page: Page, selectors: string): Promise<string[]> {
  // Runs in the page; a string, since the project compiles without the DOM library.
  return page.evaluate<string[]>(`(() => {
    const out = [];
    for (const el of document.querySelectorAll(${JSON.stringify(selectors)})) {
      if (el.closest('[hidden]') || el.offsetParent === null) continue;
      if (el.scrollWidth > el.clientWidth + 1)
        out.push((el.id || el.className) + ': "' + el.textContent.trim().slice(0, 60) + '" ' + el.scrollWidth + ' > ' + el.clientWidth);
    }
    return out;
  })()`);
}
