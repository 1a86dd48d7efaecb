// @ts-check
/**
 * Small helpers shared by the page's modules: building DOM nodes (text only, never HTML strings),
 * number formatting with units, and the authorised API client.
 */

/**
 * Creates an element. `attrs` keys starting with "on" add listeners; "class", "hidden", "disabled",
 * "value", "checked" and "dataset" are handled; other keys become attributes. Children may be
 * strings, nodes, null/false (skipped) or arrays of those.
 * @param {string} tag
 * @param {Record<string, any> | null} [attrs]
 * @param {...any} children
 * @returns {HTMLElement}
 */
export function h(tag, attrs, ...children) {
  const el = document.createElement(tag);
  for (const [k, v] of Object.entries(attrs ?? {})) {
    if (v === undefined || v === null || v === false) continue;
    if (k.startsWith('on') && typeof v === 'function') el.addEventListener(k.slice(2), v);
    else if (k === 'class') el.className = String(v);
    else if (k === 'dataset') Object.assign(el.dataset, v);
    else if (k === 'value' || k === 'checked' || k === 'disabled' || k === 'hidden')
      /** @type {any} */ (el)[k] = v;
    else el.setAttribute(k, v === true ? '' : String(v));
  }
  const add = (/** @type {any} */ c) => {
    if (c === null || c === undefined || c === false) return;
    if (Array.isArray(c)) c.forEach(add);
    else el.append(c instanceof Node ? c : document.createTextNode(String(c)));
  };
  children.forEach(add);
  return el;
}

/**
 * Appends children as h() takes them (strings, nodes, arrays; null and false skipped).
 * @param {Element} el
 * @param {...any} children
 */
export function append(el, ...children) {
  const holder = h('div', null, ...children);
  el.append(...Array.from(holder.childNodes));
}

/** Replaces the children. @param {Element} el @param {...any} children */
export function fill(el, ...children) {
  el.replaceChildren();
  append(el, ...children);
}

/** @param {number | null | undefined} x @param {number} digits */
export function num(x, digits) {
  return x === null || x === undefined || !Number.isFinite(x) ? '-' : x.toFixed(digits);
}

/** Display units of velocity, as the config sets them. */
export const units = { velocity: /** @type {'mm/s' | 'in/s'} */ ('mm/s') };

/**
 * A velocity in mm/s as a number string in the display units.
 * @param {number | null | undefined} mmS
 */
export function vel(mmS) {
  if (mmS === null || mmS === undefined || !Number.isFinite(mmS)) return '-';
  return units.velocity === 'in/s' ? (mmS / 25.4).toFixed(3) : mmS.toFixed(2);
}

/** @param {number | null | undefined} d */
export function deg(d) {
  return d === null || d === undefined || !Number.isFinite(d)
    ? '-'
    : `${Math.round(d) % 360}\u00b0`;
}

/** @param {string | null | undefined} iso */
export function when(iso) {
  if (!iso) return '-';
  const d = new Date(iso);
  return (
    `${d.toLocaleDateString(undefined, { year: 'numeric', month: 'short', day: 'numeric' })} ` +
    `${d.toLocaleTimeString(undefined, { hour: '2-digit', minute: '2-digit', second: '2-digit' })}`
  );
}

/** F = m r omega^2, N. @param {number} massG @param {number} radiusMm @param {number | null} rpm */
export function forceN(massG, radiusMm, rpm) {
  if (rpm === null || !(rpm > 0)) return null;
  const w = (rpm * 2 * Math.PI) / 60;
  return (massG / 1000) * (radiusMm / 1000) * w * w;
}

export class ApiFailure extends Error {
  /**
   * @param {number} status
   * @param {string} code
   * @param {string} message
   * @param {string} hint
   * @param {string[]} problems
   */
  constructor(status, code, message, hint, problems) {
    super(message);
    this.status = status;
    this.code = code;
    this.hint = hint;
    this.problems = problems;
  }
}

/** The API client: every call carries the token; a 401 asks for the token again. */
export const api = {
  token: '',
  /** @type {() => void} */
  onUnauthorised: () => {},
  /** @param {string} path @param {RequestInit} [init] */
  async call(path, init = {}) {
    const res = await fetch(path, {
      ...init,
      headers: {
        ...(init.headers ?? {}),
        Authorization: `Bearer ${this.token}`,
        ...(init.body ? { 'Content-Type': 'application/json' } : {}),
      },
    });
    const text = await res.text();
    /** @type {any} */
    let body = null;
    try {
      body = text ? JSON.parse(text) : null;
    } catch {
      body = null;
    }
    if (res.status === 401) this.onUnauthorised();
    if (!res.ok) {
      const e = body?.error ?? {};
      throw new ApiFailure(
        res.status,
        e.code ?? 'http',
        e.message ?? `request failed (${res.status})`,
        e.hint ?? '',
        e.problems ?? [],
      );
    }
    return body;
  },
  /** @param {string} path */
  get(path) {
    return this.call(path);
  },
  /** @param {string} path @param {unknown} body */
  post(path, body) {
    return this.call(path, { method: 'POST', body: JSON.stringify(body ?? {}) });
  },
};

/** A message box for a failed action: what went wrong and what to do. @param {unknown} e */
export function errorBox(e) {
  const f = e instanceof ApiFailure ? e : null;
  return h(
    'div',
    { class: 'msg msg-error', role: 'alert' },
    h('strong', null, f ? f.message : String(/** @type {any} */ (e)?.message ?? e)),
    f && f.problems.length > 1
      ? h(
          'ul',
          null,
          f.problems.map((p) => h('li', null, p)),
        )
      : null,
    f && f.hint ? h('div', null, '\u2192 ', f.hint) : null,
  );
}
