/**
 * ChartController: the whole life of one echarts chart inside a lit component.
 *
 * - init: after the host's first render, on an element of its shadow root that has an explicit
 *   size (the container's CSS gives the height; the width is read from layout), with the base
 *   option (axes, grids, zoom, tooltip; `animation: false`).
 * - resize: a ResizeObserver on the container, throttled to one resize per animation frame and at
 *   most every `RESIZE_MS` (echarts itself only follows window resizes).
 * - update: `setSeries` sends only series (matched by id; `replaceMerge` drops series that are gone)
 *   with `lazyUpdate`, so axes and the dataZoom window are kept and repeated updates in one frame
 *   render once; it can send just the series that changed. Updates of all charts go out one chart
 *   per animation frame (ChartUpdateQueue). Updates given before init are kept and applied at init.
 * - dispose: when the host disconnects; the instance is dropped, and re-created if the host is
 *   connected again. The instance is never reactive state.
 */
import type { ReactiveController, ReactiveControllerHost } from 'lit';
import { BarChart, LineChart, ScatterChart } from 'echarts/charts';
import { AriaComponent, DataZoomComponent, GridComponent, LegendComponent, MarkAreaComponent, MarkLineComponent, TooltipComponent } from 'echarts/components';
import * as echarts from 'echarts/core';
import { CanvasRenderer } from 'echarts/renderers';
import type { BarSeriesOption, LineSeriesOption, ScatterSeriesOption } from 'echarts/charts';
import type { AriaComponentOption, DataZoomComponentOption, GridComponentOption, LegendComponentOption, TooltipComponentOption } from 'echarts/components';
import { FONT } from './theme.js';

echarts.use([LineChart, ScatterChart, BarChart, GridComponent, DataZoomComponent, TooltipComponent, LegendComponent, MarkLineComponent, MarkAreaComponent, AriaComponent, CanvasRenderer]);

export type SeriesOption = LineSeriesOption | ScatterSeriesOption | BarSeriesOption;
export type ChartOption = echarts.ComposeOption<SeriesOption | GridComponentOption | DataZoomComponentOption | TooltipComponentOption | LegendComponentOption | AriaComponentOption>;

const RESIZE_MS = 100;

/**
 * Chart updates wait here and go out one chart per animation frame, in the order they were asked
 * for (the run's channel charts first, as they are rendered first). A new run detail touches six
 * charts; drawing them in one frame would block the page for the sum of their times.
 */
class ChartUpdateQueue {
  private readonly waiting = new Set<ChartController>();
  private frame?: number;

  add(c: ChartController): void {
    this.waiting.add(c);
    this.frame ??= requestAnimationFrame(() => this.next());
  }

  remove(c: ChartController): void {
    this.waiting.delete(c);
  }

  private next(): void {
    this.frame = undefined;
    const first = this.waiting.values().next();
    if (first.done) return;
    this.waiting.delete(first.value);
    first.value.flush();
    if (this.waiting.size > 0) this.frame = requestAnimationFrame(() => this.next());
  }
}

const queue = new ChartUpdateQueue();

export interface ChartControllerOptions {
  /** The element (in the host's shadow root) the chart draws into; it must have a CSS height. */
  readonly container: () => HTMLElement | null | undefined;
  /** Everything but the series data: built once, at init. */
  readonly base: () => ChartOption;
  /** Called once after init (e.g. to listen to chart events). */
  readonly onInit?: (chart: echarts.ECharts) => void;
}

export class ChartController implements ReactiveController {
  private chart?: echarts.ECharts;
  private observer?: ResizeObserver;
  private resizeFrame?: number;
  private lastResize = 0;
  private pending?: { series: SeriesOption[]; only?: ReadonlySet<string> };

  constructor(
    private readonly host: ReactiveControllerHost,
    private readonly options: ChartControllerOptions,
  ) {
    host.addController(this);
  }

  hostConnected(): void {
    // The container exists only after a render: init waits for hostUpdated.
  }

  hostUpdated(): void {
    if (!this.chart) this.init();
  }

  hostDisconnected(): void {
    this.dispose();
  }

  /**
   * Give the chart its series (matched by id; `replaceMerge` drops series that are gone). With
   * `only`, just those series are sent and the others are left as they are (less work for echarts).
   * The update waits for this chart's turn in the frame queue; a later call replaces a waiting one.
   */
  setSeries(series: SeriesOption[], only?: ReadonlySet<string>): void {
    const waiting = this.pending;
    // A partial update on top of a waiting one keeps the union of what must be sent.
    const keep = only && waiting?.only ? new Set([...waiting.only, ...only]) : only && waiting && !waiting.only ? undefined : only;
    this.pending = { series, only: keep };
    if (this.chart) queue.add(this);
  }

  /** Send the waiting update to echarts (called by the frame queue). */
  flush(): void {
    const p = this.pending;
    if (!this.chart || !p) return;
    this.pending = undefined;
    if (p.only) {
      const only = p.only;
      this.chart.setOption({ series: p.series.filter((s) => only.has(String(s.id))) }, { lazyUpdate: true });
    } else this.chart.setOption({ series: p.series }, { replaceMerge: ['series'], lazyUpdate: true });
  }

  /** Re-apply the base option after a structural input changed (a unit, the horizon); rare. */
  configure(): void {
    this.chart?.setOption(this.options.base(), { lazyUpdate: true });
  }

  private init(): void {
    const el = this.options.container();
    if (!el || !el.isConnected) return;
    const rect = el.getBoundingClientRect();
    const width = Math.max(120, Math.round(rect.width));
    const height = Math.max(80, Math.round(rect.height));
    const chart = echarts.init(el, undefined, { renderer: 'canvas', width, height });
    chart.setOption({ animation: false, textStyle: { fontFamily: FONT }, ...this.options.base() });
    this.chart = chart;
    this.options.onInit?.(chart);
    if (this.pending) {
      // Before init every update is complete: the chart has nothing to merge into yet.
      chart.setOption({ series: this.pending.series }, { replaceMerge: ['series'], lazyUpdate: true });
      this.pending = undefined;
    }
    this.observer = new ResizeObserver(() => this.requestResize());
    this.observer.observe(el);
  }

  private requestResize(): void {
    if (this.resizeFrame !== undefined) return;
    const wait = Math.max(0, this.lastResize + RESIZE_MS - performance.now());
    const run = () => {
      this.resizeFrame = requestAnimationFrame(() => {
        this.resizeFrame = undefined;
        this.lastResize = performance.now();
        const el = this.options.container();
        if (!this.chart || !el) return;
        const rect = el.getBoundingClientRect();
        if (rect.width > 0 && rect.height > 0) this.chart.resize({ width: Math.round(rect.width), height: Math.round(rect.height) });
      });
    };
    if (wait > 0) {
      this.resizeFrame = -1;
      setTimeout(() => {
        this.resizeFrame = undefined;
        run();
      }, wait);
    } else run();
  }

  private dispose(): void {
    queue.remove(this);
    this.observer?.disconnect();
    this.observer = undefined;
    if (this.resizeFrame !== undefined && this.resizeFrame >= 0) cancelAnimationFrame(this.resizeFrame);
    this.resizeFrame = undefined;
    this.chart?.dispose();
    this.chart = undefined;
  }
}
