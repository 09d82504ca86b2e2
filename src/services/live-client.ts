import type { LiveFrame } from '../types/live';

/**
 * The one WebSocket to /ws. The server sends a snapshot on every connect, then change events;
 * this module only keeps the socket up (back-off with jitter, pings, a dead-socket check) and
 * hands each frame to the caller. It knows nothing of stores or pages.
 */

export type LiveConnection = 'off' | 'connecting' | 'live' | 'reconnecting';

export type LiveClientOptions = {
  onFrame: (frame: LiveFrame) => void;
  onConnection: (state: LiveConnection) => void;
  /** The server closed the socket because the session ended (close code 4401). */
  onSignedOut?: () => void;
  /** Several connects in a row failed before opening: the session may have ended, or the server is down. */
  onRepeatedFailure?: () => void;
  url?: () => string;
  pingMs?: number;
  baseDelayMs?: number;
  maxDelayMs?: number;
  random?: () => number;
};

export type LiveClient = {
  start: () => void;
  stop: () => void;
  /** Ask for a fresh snapshot on the open socket. */
  resync: () => void;
  readonly state: LiveConnection;
};

/** Exponential back-off with "equal jitter": half the step fixed, half random, capped. */
export function backoffDelay(attempt: number, baseMs = 500, capMs = 15_000, random = Math.random): number {
  const step = Math.min(capMs, baseMs * 2 ** Math.max(0, attempt));
  return Math.round(step / 2 + (random() * step) / 2);
}

export function liveUrl(loc: Pick<Location, 'protocol' | 'host'> = window.location): string {
  return `${loc.protocol === 'https:' ? 'wss:' : 'ws:'}//${loc.host}/ws`;
}

const SIGNED_OUT = 4401;
const FAILURES_BEFORE_CHECK = 3;

export function createLiveClient(o: LiveClientOptions): LiveClient {
  const pingMs = o.pingMs ?? 25_000;
  let ws: WebSocket | null = null;
  let running = false;
  let attempt = 0;
  let failures = 0;
  let state: LiveConnection = 'off';
  let lastFrameAt = 0;
  let retryTimer: ReturnType<typeof setTimeout> | null = null;
  let pingTimer: ReturnType<typeof setInterval> | null = null;
  let snapshotTimer: ReturnType<typeof setTimeout> | null = null;

  const setState = (s: LiveConnection) => {
    if (s === state) return;
    state = s;
    o.onConnection(s);
  };

  const clearTimers = () => {
    if (retryTimer) clearTimeout(retryTimer);
    if (pingTimer) clearInterval(pingTimer);
    if (snapshotTimer) clearTimeout(snapshotTimer);
    retryTimer = pingTimer = snapshotTimer = null;
  };

  const send = (msg: { type: 'ping' | 'resync' }) => {
    if (ws && ws.readyState === WebSocket.OPEN) ws.send(JSON.stringify(msg));
  };

  /** Forget the socket without waiting for a close handshake that may never come. */
  function drop(sock: WebSocket) {
    sock.onopen = sock.onmessage = sock.onclose = sock.onerror = null;
    try {
      sock.close();
    } catch {
      /* already closed */
    }
    if (ws === sock) ws = null;
  }

  function scheduleRetry() {
    clearTimers();
    if (!running) return;
    setState('reconnecting');
    retryTimer = setTimeout(connect, backoffDelay(attempt, o.baseDelayMs, o.maxDelayMs, o.random));
    attempt += 1;
  }

  function connect() {
    clearTimers();
    if (!running) return;
    if (state === 'off') setState('connecting');
    let sock: WebSocket;
    try {
      sock = new WebSocket((o.url ?? liveUrl)());
    } catch {
      scheduleRetry();
      return;
    }
    ws = sock;
    let opened = false;

    sock.onopen = () => {
      opened = true;
      failures = 0;
      lastFrameAt = Date.now();
      // The server sends a snapshot by itself; ask again if it has not come.
      snapshotTimer = setTimeout(() => send({ type: 'resync' }), 5_000);
      pingTimer = setInterval(() => {
        if (Date.now() - lastFrameAt > pingMs * 2 + 5_000) {
          // Nothing heard for two pings: the socket is dead even if the browser has not noticed.
          drop(sock);
          scheduleRetry();
          return;
        }
        send({ type: 'ping' });
      }, pingMs);
    };

    sock.onmessage = (ev) => {
      lastFrameAt = Date.now();
      let frame: unknown;
      try {
        frame = JSON.parse(String(ev.data));
      } catch {
        return;
      }
      if (!frame || typeof frame !== 'object' || typeof (frame as LiveFrame).type !== 'string') return;
      const f = frame as LiveFrame;
      if (f.type === 'snapshot') {
        attempt = 0;
        if (snapshotTimer) clearTimeout(snapshotTimer);
        snapshotTimer = null;
        setState('live');
      }
      if (f.type === 'pong') return;
      o.onFrame(f);
    };

    sock.onerror = () => {
      /* a close event follows */
    };

    sock.onclose = (ev) => {
      if (ws !== sock) return;
      ws = null;
      if (!running) return;
      if (ev.code === SIGNED_OUT) {
        stop();
        o.onSignedOut?.();
        return;
      }
      if (!opened) {
        failures += 1;
        if (failures % FAILURES_BEFORE_CHECK === 0) o.onRepeatedFailure?.();
      }
      scheduleRetry();
    };
  }

  /** Back online, or the tab is shown again: do not wait out a long back-off. */
  function retryNow() {
    if (!running || ws) return;
    attempt = 0;
    connect();
  }
  const onVisible = () => {
    if (document.visibilityState === 'visible') retryNow();
  };

  function start() {
    if (running) return;
    running = true;
    attempt = 0;
    failures = 0;
    window.addEventListener('online', retryNow);
    document.addEventListener('visibilitychange', onVisible);
    connect();
  }

  function stop() {
    running = false;
    clearTimers();
    window.removeEventListener('online', retryNow);
    document.removeEventListener('visibilitychange', onVisible);
    if (ws) drop(ws);
    setState('off');
  }

  return {
    start,
    stop,
    resync: () => send({ type: 'resync' }),
    get state() {
      return state;
    },
  };
}
