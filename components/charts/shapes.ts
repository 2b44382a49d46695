/**
 * Class marks shared by the charts: the Okabe–Ito colour AND a shape per class (same mapping as
 * the queue's class badges), so a class is never told by colour alone.
 */
import { classStyle } from '@/components/queue/ClassBadge';

export type Shape = ReturnType<typeof classStyle>['shape'];
export { classStyle };

/** SVG path of a class shape of radius r centred on (0, 0). */
export function shapePath(shape: Shape, r: number): string {
  const h = r;
  switch (shape) {
    case 'circle':
      return `M${-h},0 a${h},${h} 0 1,0 ${2 * h},0 a${h},${h} 0 1,0 ${-2 * h},0 Z`;
    case 'square':
      return `M${-h * 0.85},${-h * 0.85} h${1.7 * h} v${1.7 * h} h${-1.7 * h} Z`;
    case 'triangle':
      return `M0,${-h} L${h},${h * 0.8} L${-h},${h * 0.8} Z`;
    case 'diamond':
      return `M0,${-h} L${h},0 L0,${h} L${-h},0 Z`;
    case 'cross':
      return `M${-h},${-h * 0.35} h${h * 0.65} v${-h * 0.65} h${h * 0.7} v${h * 0.65} h${h * 0.65} v${h * 0.7} h${-h * 0.65} v${h * 0.65} h${-h * 0.7} v${-h * 0.65} h${-h * 0.65} Z`;
    case 'star': {
      const pts: string[] = [];
      for (let k = 0; k < 10; k++) {
        const a = (Math.PI * k) / 5 - Math.PI / 2;
        const rr = k % 2 === 0 ? h * 1.1 : h * 0.5;
        pts.push(`${(rr * Math.cos(a)).toFixed(2)},${(rr * Math.sin(a)).toFixed(2)}`);
      }
      return `M${pts.join(' L')} Z`;
    }
    case 'bar':
      return `M${-h},${-h * 0.4} h${2 * h} v${0.8 * h} h${-2 * h} Z`;
  }
}
