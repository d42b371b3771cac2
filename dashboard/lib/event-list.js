// A list of stored events, newest first, as in the channel and derived-result views.

import { h, replaceChildren } from './dom.js';
import { describeEvent, SEVERITY, clockTime } from './format.js';

/** Fills `list` with the events (oldest first as stored), or with `emptyText` when there are none. */
export function showEvents(list, stored, emptyText, unit = null) {
  const events = stored.slice().reverse();
  replaceChildren(
    list,
    events.length === 0
      ? h('li', { className: 'muted', text: emptyText })
      : events.map((event) => {
          const info = describeEvent(event, unit);
          return h('li', { className: `sev-${info.severity}` }, h('span', { className: 'time', text: clockTime(event.timeMs) }), h('span', { className: 'sev', text: `${SEVERITY[info.severity].symbol} ${info.title}` }), info.detail ? h('span', { className: 'detail', text: info.detail }) : null);
        }),
  );
}
