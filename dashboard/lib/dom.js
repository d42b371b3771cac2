// Building the page from data: every string from the network becomes a text node or an attribute
// value set through the DOM, never markup. There is no innerHTML in the dashboard.

/**
 * Creates an element. props: className, text, title, href, and any other attribute (set with
 * setAttribute; event-handler attributes are refused, handlers go through `on`). Children may be
 * nodes, strings (text nodes), null/false (skipped) or arrays of those.
 */
export function h(tag, props, ...children) {
  const element = document.createElement(tag);
  if (props) {
    for (const [key, value] of Object.entries(props)) {
      if (value === undefined || value === null || value === false) continue;
      if (key === 'className') element.className = value;
      else if (key === 'text') element.textContent = String(value);
      else if (key === 'on') for (const [event, handler] of Object.entries(value)) element.addEventListener(event, handler);
      else if (key === 'dataset') Object.assign(element.dataset, value);
      else if (key === 'style') element.setAttribute('style', value);
      else if (/^on/i.test(key)) throw new Error(`refusing the event-handler attribute ${key}`);
      else element.setAttribute(key, value === true ? '' : String(value));
    }
  }
  append(element, children);
  return element;
}

function append(parent, children) {
  for (const child of children) {
    if (child === null || child === undefined || child === false) continue;
    if (Array.isArray(child)) append(parent, child);
    else if (child instanceof Node) parent.appendChild(child);
    else parent.appendChild(document.createTextNode(String(child)));
  }
}

/** Sets an element's text when it differs (saves layout work on frequent updates). */
export function setText(element, text) {
  const value = String(text);
  if (element.textContent !== value) element.textContent = value;
}

export function clear(element) {
  while (element.firstChild) element.removeChild(element.firstChild);
}

/** Replaces an element's children. */
export function replaceChildren(element, ...children) {
  clear(element);
  append(element, children);
}

export function byId(id) {
  return document.getElementById(id);
}

/** A name as text with line-break opportunities after . : / (long channel names wrap between their parts, never inside a word such as glycol_in). */
export function breakable(name) {
  const parts = [];
  for (const piece of String(name).split(/(?<=[.:/])/)) {
    if (parts.length > 0) parts.push(document.createElement('wbr'));
    parts.push(document.createTextNode(piece));
  }
  return parts;
}
