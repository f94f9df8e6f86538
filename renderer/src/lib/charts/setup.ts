/**
 * Chart.js set up once for the app: the parts we use, the annotation plugin (phase boundaries,
 * target bands, "next dose" lines), and calm defaults readable at arm's length.
 */
import {
  CategoryScale,
  Chart,
  Filler,
  Legend,
  LinearScale,
  LineController,
  LineElement,
  LogarithmicScale,
  PointElement,
  ScatterController,
  Tooltip,
  Title,
  BarController,
  BarElement,
} from 'chart.js';
import annotationPlugin from 'chartjs-plugin-annotation';
import { markerLabelsPlugin } from './markerLabels.js';

let done = false;

export function setupCharts(): typeof Chart {
  if (done) return Chart;
  Chart.register(LineController, ScatterController, BarController, LineElement, PointElement, BarElement, LinearScale, LogarithmicScale, CategoryScale, Filler, Legend, Tooltip, Title, annotationPlugin, markerLabelsPlugin);
  Chart.defaults.font.family = "system-ui, 'Segoe UI', 'DejaVu Sans', Arial, sans-serif";
  Chart.defaults.font.size = 13;
  Chart.defaults.color = '#1c2730';
  Chart.defaults.borderColor = '#dde2e4';
  Chart.defaults.animation = false;
  Chart.defaults.maintainAspectRatio = false;
  // Room for the last x tick label, which chart.js otherwise clips on small charts.
  Chart.defaults.layout.padding = { right: 14, top: 2, bottom: 0, left: 0 };
  done = true;
  return Chart;
}

/** Series colours: our own, distinguishable in grey print as well (different lightness). */
export const COLOURS = {
  main: '#2c5f7a',
  second: '#b35c00',
  third: '#5b7f3a',
  fourth: '#7a4a8c',
  observed: '#1c2730',
  band95: 'rgba(44, 95, 122, 0.14)',
  band80: 'rgba(44, 95, 122, 0.30)',
  target: 'rgba(91, 127, 58, 0.16)',
  toxic: 'rgba(140, 28, 19, 0.12)',
  grid: '#dde2e4',
};

export const SERIES = [COLOURS.main, COLOURS.second, COLOURS.third, COLOURS.fourth, '#4d6b73', '#9c6b2f'];
