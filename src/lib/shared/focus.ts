/**
 * Where keyboard focus goes after an action, so a keyboard or screen-reader user lands on what happened:
 * the result, or the error. Safe for islands (browser only at call time).
 */
import { useEffect, useRef, type RefObject } from 'react';

const AFTER_NAVIGATION = 'offsetry:focus-main';

/** Focus an element that may not be focusable by itself (a heading, a notice) and bring it into view. */
export function focusResult(el: HTMLElement | null | undefined) {
  if (!el) return;
  if (!el.hasAttribute('tabindex') && !el.matches('a[href], button, input, select, textarea')) el.tabIndex = -1;
  el.focus({ preventScroll: true });
  el.scrollIntoView({ block: 'center' });
}

/** Focus `ref` whenever `key` changes to a truthy value (a message shown, an error set, a state reached). */
export function useFocusWhen<T extends HTMLElement>(key: unknown): RefObject<T | null> {
  const ref = useRef<T | null>(null);
  useEffect(() => {
    if (key) focusResult(ref.current);
  }, [key]);
  return ref;
}

/**
 * Open the page an action produced (the new session, the fit) and put focus on its main heading there:
 * AppShell's script reads the mark, so the result is announced instead of focus falling to the page top.
 */
export function openResult(url: string) {
  try {
    sessionStorage.setItem(AFTER_NAVIGATION, '1');
  } catch {
    // storage off: the page still opens, focus starts at the top
  }
  location.href = url;
}

export const FOCUS_MAIN_MARK = AFTER_NAVIGATION;
