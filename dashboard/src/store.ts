/**
 * EventStore: the one owner of the dashboard's connection to its server and of the event state.
 *
 * - Opens the WebSocket /watch on the page's own origin, applies the snapshot and then the deltas
 *   (`run`, `vignette`, `combined`, `log`) to plain maps, and publishes an immutable `ViewState` at
 *   most once per animation frame and at most 10 times a second (however many messages arrived),
 *   as a `change` event.
 * - Reconnects after a close or error with exponential backoff (0.5 s doubling to 15 s, with jitter);
 *   each new connection starts from the server's snapshot, so nothing is patched across a gap.
 * - Browsers cannot send WebSocket pings, so liveness is the application's job: after `idleMs`
 *   without any message the store sends a probe and, if nothing arrives within `probeTimeoutMs`,
 *   drops the socket and reconnects (a half-open TCP connection otherwise looks open for minutes).
 * - Fetches /api/runs/:vignette/:track for the selected run: at once when the selection changes
 *   (after a short debounce for key repeat), and while the run changes at most once per
 *   `detailIntervalMs` (1 s), never two requests at a time. Parts of the detail that did not change keep
 *   their identity (./share.ts), so panels redraw only what changed.
 * - Sends notes over the same socket and resolves each with the server's `noted` or `error` reply.
 *
 * Events: `change` (read `store.view`).
 */
import type { EventView, LogEntryView, RunDetail, RunView, VignetteView, WatchMessage, WatchUpdate } from '../../ingest/service/view.js';
import type { ConnectionState, ViewState } from './model.js';
import { shareUnchanged } from './share.js';

export interface StoreOptions {
  /** Base for /watch and /api (default: the page's location). */
  readonly base?: string;
  /** Silence after which a liveness probe is sent, ms. */
  readonly idleMs?: number;
  /** How long a probe may go unanswered before the socket counts as dead, ms. */
  readonly probeTimeoutMs?: number;
  /** Smallest time between two detail requests for the same run, ms (default 1000: once a second). */
  readonly detailIntervalMs?: number;
  /** Smallest time between two published views, ms (default 100: at most 10 per second, on animation frames). */
  readonly publishIntervalMs?: number;
  /** Delay before fetching a newly selected run (coalesces key repeat), ms. */
  readonly selectDebounceMs?: number;
  /** How long a note may wait for the server's reply, ms. */
  readonly noteTimeoutMs?: number;
  /** Log entries kept (the server keeps all in its journal). */
  readonly logEntries?: number;
}

export interface NoteInput {
  readonly text: string;
  readonly author?: string;
  readonly vignette?: string;
  readonly track?: string;
  readonly t?: number;
}

/** A note the server refused, or that could not be sent. */
export class NoteError extends Error {
  constructor(
    readonly code: string,
    message: string,
  ) {
    super(message);
    this.name = 'NoteError';
  }
}

interface PendingNote {
  readonly resolve: (entry: number) => void;
  readonly reject: (e: NoteError) => void;
  readonly timer: ReturnType<typeof setTimeout>;
}

type Reply = { readonly type: 'noted'; readonly id: string; readonly entry: number } | { readonly type: 'error'; readonly id?: string; readonly code: string; readonly reason: string };

const BACKOFF_MIN_MS = 500;
const BACKOFF_MAX_MS = 15_000;
const PROBE_PREFIX = 'probe-';

export class EventStore extends EventTarget {
  view: ViewState = { connection: { status: 'connecting', attempt: 0 } };

  private readonly base: string;
  private readonly idleMs: number;
  private readonly probeTimeoutMs: number;
  private readonly detailIntervalMs: number;
  private readonly publishIntervalMs: number;
  private readonly selectDebounceMs: number;
  private readonly noteTimeoutMs: number;
  private readonly logEntries: number;

  private ws?: WebSocket;
  private attempt = 0;
  private stopped = true;
  private reconnectTimer?: ReturnType<typeof setTimeout>;
  private watchdog?: ReturnType<typeof setInterval>;
  private lastMessageAt = 0;
  private probeSentAt?: number;
  private sequence = 0;
  private readonly pendingNotes = new Map<string, PendingNote>();

  // The event, as plain maps; `dirty` says which published arrays must be rebuilt.
  private plan?: EventView['plan'];
  private readonly vignettes = new Map<string, VignetteView>();
  private readonly runs = new Map<string, RunView>();
  private combined?: EventView['combined'];
  private timeline: EventView['timeline'] = [];
  private log: LogEntryView[] = [];
  private cautions: readonly string[] = [];
  private journal: EventView['journal'] = { writable: true };
  /** The monitors of a gathered view (`plumbline gather`); absent for one service. */
  private gathered?: EventView['gathered'];
  private readonly dirty = { vignettes: false, runs: false, log: false, event: false };

  private connection: ConnectionState = { status: 'connecting', attempt: 0 };
  private selected?: string;
  private detail?: RunDetail;
  private detailError?: string;

  private detailWanted = false;
  private detailAbort?: AbortController;
  private detailStartedAt = 0;
  private detailTimer?: ReturnType<typeof setTimeout>;

  private frame?: number;
  private frameTimer?: ReturnType<typeof setTimeout>;
  private publishedAt = 0;

  constructor(options: StoreOptions = {}) {
    super();
    this.base = options.base ?? globalThis.location.href;
    this.idleMs = options.idleMs ?? 25_000;
    this.probeTimeoutMs = options.probeTimeoutMs ?? 10_000;
    this.detailIntervalMs = options.detailIntervalMs ?? 1000;
    this.publishIntervalMs = options.publishIntervalMs ?? 100;
    this.selectDebounceMs = options.selectDebounceMs ?? 120;
    this.noteTimeoutMs = options.noteTimeoutMs ?? 10_000;
    this.logEntries = options.logEntries ?? 500;
  }

  // ------------------------------------------------------------------ life

  start(): void {
    if (!this.stopped) return;
    this.stopped = false;
    this.watchdog = setInterval(() => this.checkAlive(), 1000);
    this.connect();
  }

  stop(): void {
    this.stopped = true;
    clearInterval(this.watchdog);
    clearTimeout(this.reconnectTimer);
    clearTimeout(this.detailTimer);
    clearTimeout(this.frameTimer);
    if (this.frame !== undefined) cancelAnimationFrame(this.frame);
    this.frame = undefined;
    this.detailAbort?.abort();
    this.dropSocket('stopped');
  }

  // ------------------------------------------------------------------ commands

  /** Select a live run by key (or clear the selection). */
  select(key: string | undefined): void {
    if (key === this.selected) return;
    this.selected = key;
    this.detailError = undefined;
    this.detailAbort?.abort();
    this.detailAbort = undefined;
    this.detailWanted = key !== undefined;
    clearTimeout(this.detailTimer);
    this.detailTimer = undefined;
    if (key !== undefined) this.detailTimer = setTimeout(() => this.pumpDetail(), this.selectDebounceMs);
    this.schedule();
  }

  /** Send a note; resolves with the log entry id, rejects with a NoteError carrying the server's code. */
  sendNote(note: NoteInput): Promise<number> {
    const ws = this.ws;
    if (!ws || ws.readyState !== WebSocket.OPEN) return Promise.reject(new NoteError('NOT_CONNECTED', 'not connected to the server; the note was not sent'));
    const id = `note-${Date.now().toString(36)}-${++this.sequence}`;
    const message = { v: 1, type: 'note', id, ...note };
    return new Promise<number>((resolve, reject) => {
      const timer = setTimeout(() => {
        this.pendingNotes.delete(id);
        reject(new NoteError('TIMEOUT', `no answer from the server within ${Math.round(this.noteTimeoutMs / 1000)} s; the note may or may not have been recorded`));
      }, this.noteTimeoutMs);
      this.pendingNotes.set(id, { resolve, reject, timer });
      ws.send(JSON.stringify(message));
    });
  }

  // ------------------------------------------------------------------ socket

  private url(path: string, protocol?: 'ws'): string {
    const u = new URL(path, this.base);
    if (protocol) u.protocol = u.protocol === 'https:' ? 'wss:' : 'ws:';
    return u.href;
  }

  private connect(): void {
    if (this.stopped) return;
    this.setConnection({ status: 'connecting', attempt: this.attempt });
    let ws: WebSocket;
    try {
      ws = new WebSocket(this.url('/watch', 'ws'));
    } catch (e) {
      this.retry(e instanceof Error ? e.message : String(e));
      return;
    }
    this.ws = ws;
    ws.onopen = () => {
      if (this.ws !== ws) return;
      this.attempt = 0;
      this.lastMessageAt = Date.now();
      this.probeSentAt = undefined;
      this.setConnection({ status: 'open', since: Date.now() });
    };
    ws.onmessage = (e: MessageEvent) => {
      if (this.ws !== ws) return;
      this.lastMessageAt = Date.now();
      this.probeSentAt = undefined;
      if (typeof e.data === 'string') this.receive(e.data);
    };
    ws.onclose = (e: CloseEvent) => {
      if (this.ws !== ws) return;
      this.dropSocket(e.reason || `connection closed (code ${e.code})`);
      this.retry(e.reason || `connection closed (code ${e.code})`);
    };
    // An error is always followed by close; the close handler reconnects.
    ws.onerror = () => undefined;
  }

  private dropSocket(reason: string): void {
    const ws = this.ws;
    this.ws = undefined;
    if (ws) {
      ws.onopen = ws.onmessage = ws.onclose = ws.onerror = null;
      if (ws.readyState === WebSocket.OPEN || ws.readyState === WebSocket.CONNECTING) ws.close(1000, 'dashboard closing');
    }
    for (const [id, p] of this.pendingNotes) {
      clearTimeout(p.timer);
      p.reject(new NoteError('NOT_CONNECTED', `the connection dropped before the server answered (${reason}); check the log before sending again`));
      this.pendingNotes.delete(id);
    }
  }

  private retry(reason: string): void {
    if (this.stopped) return;
    const delay = Math.min(BACKOFF_MAX_MS, BACKOFF_MIN_MS * 2 ** this.attempt) * (0.75 + Math.random() * 0.5);
    this.attempt++;
    this.setConnection({ status: 'waiting', attempt: this.attempt, retryAt: Date.now() + delay, reason });
    clearTimeout(this.reconnectTimer);
    this.reconnectTimer = setTimeout(() => this.connect(), delay);
  }

  private checkAlive(): void {
    const ws = this.ws;
    if (!ws || ws.readyState !== WebSocket.OPEN) return;
    const now = Date.now();
    if (this.probeSentAt !== undefined) {
      if (now - this.probeSentAt > this.probeTimeoutMs) {
        this.dropSocket('the server stopped answering');
        this.retry('the server stopped answering');
      }
      return;
    }
    if (now - this.lastMessageAt > this.idleMs) {
      // The protocol's application-level probe: the server answers {type:'pong', id}.
      this.probeSentAt = now;
      ws.send(JSON.stringify({ v: 1, type: 'ping', id: `${PROBE_PREFIX}${++this.sequence}` }));
    }
  }

  private setConnection(c: ConnectionState): void {
    this.connection = c;
    this.schedule();
  }

  // ------------------------------------------------------------------ messages

  private receive(text: string): void {
    let msg: WatchMessage | Reply | { type?: unknown };
    try {
      msg = JSON.parse(text) as WatchMessage | Reply;
    } catch {
      return; // not JSON: nothing a dashboard can act on
    }
    switch (msg.type) {
      case 'snapshot':
        this.applySnapshot((msg as Extract<WatchMessage, { type: 'snapshot' }>).state);
        break;
      case 'updates':
        // The changes of one short window on the server, at most one per run, vignette or entry.
        for (const u of (msg as Extract<WatchMessage, { type: 'updates' }>).updates) this.applyUpdate(u);
        break;
      case 'noted': {
        const r = msg as Extract<Reply, { type: 'noted' }>;
        this.settleNote(r.id, undefined, r.entry);
        return;
      }
      case 'error': {
        const r = msg as Extract<Reply, { type: 'error' }>;
        if (r.id?.startsWith(PROBE_PREFIX)) return; // the answer to a liveness probe
        if (r.id) this.settleNote(r.id, new NoteError(r.code, r.reason));
        return;
      }
      default:
        if (!this.applyUpdate(msg as WatchUpdate)) return;
        break;
    }
    this.schedule();
  }

  /** Apply one delta; false for a type this dashboard does not know (a newer server): ignored. */
  private applyUpdate(msg: WatchUpdate): boolean {
    switch (msg.type) {
      case 'run': {
        const run = (msg as Extract<WatchMessage, { type: 'run' }>).run;
        this.runs.set(run.key, run);
        this.dirty.runs = true;
        if (run.key === this.selected) this.wantDetail();
        this.autoSelect();
        break;
      }
      case 'progress': {
        // New points only: the run's count and latest time (a run not seen yet waits for its 'run').
        const run = this.runs.get(msg.key);
        if (!run) return true;
        this.runs.set(msg.key, { ...run, points: msg.points, lastT: msg.lastT });
        this.dirty.runs = true;
        if (msg.key === this.selected) this.wantDetail();
        break;
      }
      case 'vignette': {
        const v = (msg as Extract<WatchMessage, { type: 'vignette' }>).vignette;
        this.vignettes.set(v.id, v);
        this.dirty.vignettes = true;
        if (this.selected !== undefined && this.runs.get(this.selected)?.vignette === v.id) this.wantDetail();
        break;
      }
      case 'combined': {
        const m = msg as Extract<WatchMessage, { type: 'combined' }>;
        this.combined = m.combined;
        if (m.timeline) this.timeline = m.timeline;
        this.dirty.event = true;
        break;
      }
      case 'journal': {
        this.journal = (msg as Extract<WatchMessage, { type: 'journal' }>).journal;
        this.dirty.event = true;
        break;
      }
      case 'log': {
        const entry = (msg as Extract<WatchMessage, { type: 'log' }>).entry;
        if (!this.log.some((e) => e.id === entry.id)) {
          this.log = [...this.log, entry];
          if (this.log.length > this.logEntries) this.log = this.log.slice(-this.logEntries);
          this.dirty.log = true;
        }
        break;
      }
      default:
        return false;
    }
    return true;
  }

  private settleNote(id: string, error: NoteError | undefined, entry?: number): void {
    const p = this.pendingNotes.get(id);
    if (!p) return;
    this.pendingNotes.delete(id);
    clearTimeout(p.timer);
    if (error) p.reject(error);
    else p.resolve(entry ?? 0);
  }

  private applySnapshot(state: EventView): void {
    this.plan = state.plan;
    this.vignettes.clear();
    for (const v of state.vignettes) this.vignettes.set(v.id, v);
    this.runs.clear();
    for (const r of state.runs) this.runs.set(r.key, r);
    this.combined = state.combined;
    this.timeline = state.timeline ?? [];
    this.log = state.log.slice(-this.logEntries);
    this.cautions = state.cautions;
    this.journal = state.journal ?? { writable: true };
    this.gathered = state.gathered;
    this.dirty.vignettes = this.dirty.runs = this.dirty.log = this.dirty.event = true;
    this.autoSelect();
    if (this.selected !== undefined) this.wantDetail();
  }

  /** With nothing selected yet, follow the newest live run in flight (else the newest run). */
  private autoSelect(): void {
    if (this.selected !== undefined || this.runs.size === 0) return;
    const live = [...this.runs.values()].filter((r) => r.source === 'live');
    const flying = live.filter((r) => r.status === 'in-flight');
    const pick = (list: RunView[]) => list.reduce<RunView | undefined>((a, r) => (!a || r.openedAt > a.openedAt ? r : a), undefined);
    const r = pick(flying) ?? pick(live);
    if (r) this.select(r.key);
  }

  // ------------------------------------------------------------------ run detail

  private wantDetail(): void {
    this.detailWanted = true;
    if (!this.detailAbort && this.detailTimer === undefined) this.pumpDetail();
  }

  private pumpDetail(): void {
    this.detailTimer = undefined;
    const key = this.selected;
    if (!this.detailWanted || key === undefined || this.stopped || this.detailAbort) return;
    const wait = this.detail?.run.key === key ? this.detailStartedAt + this.detailIntervalMs - Date.now() : 0;
    if (wait > 0) {
      this.detailTimer = setTimeout(() => this.pumpDetail(), wait);
      return;
    }
    this.detailWanted = false;
    this.detailStartedAt = Date.now();
    const abort = new AbortController();
    this.detailAbort = abort;
    const [vignette, ...rest] = key.split('/');
    const url = this.url(`/api/runs/${encodeURIComponent(vignette)}/${encodeURIComponent(rest.join('/'))}`);
    fetch(url, { signal: abort.signal, headers: { accept: 'application/json' } })
      .then(async (res) => {
        const body = (await res.json()) as RunDetail | { error: string; reason: string };
        if (!res.ok || 'error' in body) throw new Error('reason' in body ? body.reason : `HTTP ${res.status}`);
        return body;
      })
      .then(
        (detail) => {
          if (abort.signal.aborted || this.selected !== key) return;
          this.detail = shareUnchanged(this.detail, detail);
          this.detailError = undefined;
        },
        (e: unknown) => {
          if (abort.signal.aborted) return;
          this.detailError = e instanceof Error ? e.message : String(e);
        },
      )
      .finally(() => {
        if (this.detailAbort === abort) this.detailAbort = undefined;
        this.schedule();
        if (this.detailWanted && this.detailTimer === undefined) this.pumpDetail();
      });
  }

  // ------------------------------------------------------------------ publishing

  /**
   * Publish on an animation frame at least `publishIntervalMs` after the previous one (or on a
   * timer when the page is hidden, where animation frames stop): everything that arrived in
   * between goes out as one view.
   */
  private schedule(): void {
    if (this.frame !== undefined || this.frameTimer !== undefined) return;
    const hidden = typeof document !== 'undefined' && document.hidden;
    const wait = Math.max(hidden ? 250 : 0, this.publishedAt + this.publishIntervalMs - Date.now());
    const onFrame = () => {
      this.frame = undefined;
      this.publish();
    };
    if (wait <= 0) {
      this.frame = requestAnimationFrame(onFrame);
      return;
    }
    this.frameTimer = setTimeout(() => {
      this.frameTimer = undefined;
      if (typeof document !== 'undefined' && document.hidden) this.publish();
      else this.frame = requestAnimationFrame(onFrame);
    }, wait);
  }

  private publish(): void {
    this.publishedAt = Date.now();
    const prev = this.view;
    let event = prev.event;
    if (this.plan && (this.dirty.event || this.dirty.runs || this.dirty.vignettes || this.dirty.log || !event)) {
      event = {
        plan: this.plan,
        vignettes: this.dirty.vignettes || !event ? [...this.vignettes.values()] : event.vignettes,
        runs: this.dirty.runs || !event ? [...this.runs.values()] : event.runs,
        combined: this.combined,
        timeline: this.timeline,
        log: this.dirty.log || !event ? this.log : event.log,
        cautions: this.cautions,
        journal: this.journal,
        ...(this.gathered ? { gathered: this.gathered } : {}),
      };
      this.dirty.event = this.dirty.runs = this.dirty.vignettes = this.dirty.log = false;
    }
    this.view = {
      connection: this.connection,
      event,
      selected: this.selected,
      detail: this.detail,
      detailError: this.detailError,
      lastMessageAt: this.lastMessageAt || undefined,
    };
    this.dispatchEvent(new Event('change'));
  }
}
