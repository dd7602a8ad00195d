// Hands the browser a file to save: the one way the client downloads (CSV, PNG, model JSON).

/** Saves a URL (a data: URL, or an object URL the caller owns) under `name`. */
export function saveHref(href: string, name: string): void {
  const a = document.createElement('a');
  a.href = href;
  a.download = name;
  document.body.appendChild(a);
  a.click();
  a.remove();
}

/** Saves a Blob under `name`; its object URL is released once the browser has taken it. */
export function saveBlob(blob: Blob, name: string): void {
  const url = URL.createObjectURL(blob);
  saveHref(url, name);
  setTimeout(() => URL.revokeObjectURL(url), 1000);
}

/** Saves a value as pretty-printed JSON. */
export const saveJson = (value: unknown, name: string): void =>
  saveBlob(new Blob([`${JSON.stringify(value, null, 2)}\n`], { type: 'application/json' }), name);
