/** Small DOM helpers that touch the page only when something actually changed. */

export function byId<T extends HTMLElement = HTMLElement>(id: string): T {
  const el = document.getElementById(id);
  if (!el) throw new Error(`the page has no element #${id}`);
  return el as T;
}

export function setText(el: Element, text: string): void {
  if (el.textContent !== text) el.textContent = text;
}

export function setData(el: HTMLElement, key: string, value: string): void {
  if (el.dataset[key] !== value) el.dataset[key] = value;
}

export function element<K extends keyof HTMLElementTagNameMap>(tag: K, className?: string, text?: string): HTMLElementTagNameMap[K] {
  const el = document.createElement(tag);
  if (className) el.className = className;
  if (text !== undefined) el.textContent = text;
  return el;
}

/** Replaces a list's flag chips with one per flag, coloured by severity. */
export function renderFlags(list: HTMLElement, flags: readonly string[], severity: (f: string) => string, label: (f: string) => string): void {
  const key = flags.join(' ');
  if (list.dataset.flags === key) return;
  list.dataset.flags = key;
  list.replaceChildren(
    ...flags.map((f) => {
      const chip = element('li', 'flag', label(f));
      chip.dataset.severity = severity(f);
      chip.dataset.flag = f;
      return chip;
    }),
  );
}
