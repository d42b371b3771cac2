/**
 * Whether an Origin header names the same site as the Host header the request was sent to (scheme
 * http or https, same host and port, default ports normalised). Used to refuse writes and
 * WebSocket connections that a page on another site makes through a browser on the rig's network
 * (cross-site request forgery, cross-site WebSocket hijacking). Requests without an Origin header
 * (curl, scripts) are not affected: they are not made by a browser on someone else's behalf.
 */
export function sameOrigin(origin: string, host: string | undefined): boolean {
  if (!host) return false;
  try {
    const from = new URL(origin);
    if (from.protocol !== 'http:' && from.protocol !== 'https:') return false;
    const to = new URL(`${from.protocol}//${host}`);
    return from.host === to.host;
  } catch {
    return false;
  }
}
