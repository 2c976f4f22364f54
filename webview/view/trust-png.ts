/**
 * The trust charts as PNG bytes (base64) for Save: the same SVG the view shows, with a standalone
 * white style, drawn onto a canvas at twice its size. No network: the SVG is a data: image.
 */
import { chartRow, LineChartSpec, lineChart, svgText } from '../../core/trust/chart';
import { CHART_PNG_STYLE } from '../../core/trust/figures';

const SCALE = 2;

export async function chartsPngBase64(specs: readonly LineChartSpec[]): Promise<string> {
  const root = chartRow(specs.map(lineChart), '#ffffff');
  const svg = svgText(root, CHART_PNG_STYLE);
  const img = new Image();
  const loaded = new Promise<void>((resolve, reject) => {
    img.onload = () => resolve();
    img.onerror = () => reject(new Error('the chart SVG did not load as an image'));
  });
  img.src = `data:image/svg+xml;charset=utf-8,${encodeURIComponent(svg)}`;
  await loaded;
  const canvas = document.createElement('canvas');
  canvas.width = Math.ceil(Number(root.attrs.width) * SCALE);
  canvas.height = Math.ceil(Number(root.attrs.height) * SCALE);
  const g = canvas.getContext('2d');
  if (!g) throw new Error('no 2D canvas to draw the chart on');
  g.drawImage(img, 0, 0, canvas.width, canvas.height);
  return canvas.toDataURL('image/png').replace(/^data:image\/png;base64,/, '');
}
