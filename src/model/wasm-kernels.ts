/**
 * Training kernels the WebAssembly backend lacks (Conv2DBackpropFilter) or runs slowly
 * (Conv2DBackpropInput). Both are built from the backend's own kernels (pad, strided slice,
 * transpose, concat, matrix product, forward convolution), working on TensorInfos directly:
 * every intermediate holds one backend reference and is released with `disposeData`, so no
 * engine-tracked tensor is made inside a kernel and nothing is freed early or leaked.
 */
import * as tf from '@tensorflow/tfjs';

type Info = tf.TensorInfo;
type Backend = tf.KernelBackend & { disposeData(dataId: object, force?: boolean): boolean };
type Attrs = Record<string, unknown>;

/** Runs another wasm kernel by name on TensorInfos. */
function run(name: string, backend: Backend, inputs: Record<string, Info>, attrs: Attrs = {}): Info {
  const kernel = tf.getKernel(name, 'wasm');
  if (!kernel) throw new Error(`the wasm backend has no ${name} kernel`);
  return kernel.kernelFunc({ inputs: inputs as tf.NamedTensorInfoMap, backend, attrs: attrs as tf.NamedAttrMap }) as Info;
}

function release(backend: Backend, ...infos: Info[]): void {
  for (const info of infos) backend.disposeData(info.dataId);
}

type Pad = 'valid' | 'same' | number | tf.backend_util.ExplicitPadding;

function convInfo(
  xShape: number[],
  filterShape: number[],
  strides: number | [number, number],
  pad: Pad,
  dimRoundingMode: 'floor' | 'round' | 'ceil' | undefined,
  dataFormat: string | undefined,
): tf.backend_util.Conv2DInfo {
  if (dataFormat !== undefined && dataFormat !== 'NHWC' && dataFormat !== 'channelsLast') {
    throw new Error(`kinhue's wasm training kernels support NHWC only, not ${dataFormat}`);
  }
  return tf.backend_util.computeConv2DInfo(
    xShape as [number, number, number, number],
    filterShape as [number, number, number, number],
    strides,
    1,
    pad,
    dimRoundingMode,
    false,
    'channelsLast',
  );
}

/**
 * dW[i,j,ci,co] = sum over n,y,x of xpad[n, y*s+i, x*s+j, ci] * dy[n,y,x,co].
 * The input is padded and transposed once to [Ci, N, Hp, Wp]; each of the k*k shifted windows is a
 * strided slice [Ci, N, Ho, Wo]; stacked they form the column matrix already transposed,
 * [k*k*Ci, N*Ho*Wo], so one plain matMul with dy [N*Ho*Wo, Co] gives the filter gradient.
 */
function conv2DBackpropFilter(args: { inputs: tf.NamedTensorInfoMap; backend: tf.KernelBackend; attrs?: tf.NamedAttrMap }): Info {
  const backend = args.backend as Backend;
  const { x, dy } = args.inputs as { x: Info; dy: Info };
  const attrs = (args.attrs ?? {}) as unknown as {
    strides: number | [number, number];
    pad: Pad;
    dataFormat?: string;
    dimRoundingMode?: 'floor' | 'round' | 'ceil';
    filterShape: [number, number, number, number];
  };
  const info = convInfo(x.shape, attrs.filterShape, attrs.strides, attrs.pad, attrs.dimRoundingMode, attrs.dataFormat);
  const { filterHeight: kh, filterWidth: kw, strideHeight: sh, strideWidth: sw, outHeight: ho, outWidth: wo } = info;
  const [n, h, w, ci] = x.shape;
  const co = info.outChannels;
  const { top, left } = info.padInfo;
  // Only as much bottom/right padding as the last window reaches.
  const needH = (ho - 1) * sh + kh;
  const needW = (wo - 1) * sw + kw;
  const bottom = Math.max(0, needH - h - top);
  const right = Math.max(0, needW - w - left);

  const padded =
    top || bottom || left || right
      ? run('PadV2', backend, { x }, { paddings: [[0, 0], [top, bottom], [left, right], [0, 0]], constantValue: 0 })
      : null;
  const src = padded ?? x;
  const xt = run('Transpose', backend, { x: src }, { perm: [3, 0, 1, 2] });
  if (padded) release(backend, padded);

  const windows: Info[] = [];
  for (let i = 0; i < kh; i++) {
    for (let j = 0; j < kw; j++) {
      windows.push(
        run('StridedSlice', backend, { x: xt }, {
          begin: [0, 0, i, j],
          end: [ci, n, i + (ho - 1) * sh + 1, j + (wo - 1) * sw + 1],
          strides: [1, 1, sh, sw],
          beginMask: 0,
          endMask: 0,
          ellipsisMask: 0,
          newAxisMask: 0,
          shrinkAxisMask: 0,
        }),
      );
    }
  }
  release(backend, xt);
  const flat = windows.map((win) => run('Reshape', backend, { x: win }, { shape: [ci, n * ho * wo] }));
  release(backend, ...windows);
  const cols = flat.length === 1 ? flat[0] : run('Concat', backend, flat as unknown as Record<string, Info>, { axis: 0 });
  if (flat.length > 1) release(backend, ...flat);

  const cols3 = run('Reshape', backend, { x: cols }, { shape: [1, kh * kw * ci, n * ho * wo] });
  const dy3 = run('Reshape', backend, { x: dy }, { shape: [1, n * ho * wo, co] });
  const prod = run('BatchMatMul', backend, { a: cols3, b: dy3 }, { transposeA: false, transposeB: false });
  release(backend, cols, cols3, dy3);
  const out = run('Reshape', backend, { x: prod }, { shape: [kh, kw, ci, co] });
  release(backend, prod);
  return out;
}

/** Filter gradient as one forward convolution (experiment). */
function conv2DBackpropFilterByConv(args: { inputs: tf.NamedTensorInfoMap; backend: tf.KernelBackend; attrs?: tf.NamedAttrMap }): Info {
  const backend = args.backend as Backend;
  const { x, dy } = args.inputs as { x: Info; dy: Info };
  const attrs = (args.attrs ?? {}) as unknown as {
    strides: number | [number, number];
    pad: Pad;
    dataFormat?: string;
    dimRoundingMode?: 'floor' | 'round' | 'ceil';
    filterShape: [number, number, number, number];
  };
  const info = convInfo(x.shape, attrs.filterShape, attrs.strides, attrs.pad, attrs.dimRoundingMode, attrs.dataFormat);
  const { filterHeight: kh, filterWidth: kw, strideHeight: sh, strideWidth: sw, outHeight: ho, outWidth: wo } = info;
  const [n, h, w, ci] = x.shape;
  const { top, left } = info.padInfo;
  const needH = (ho - 1) * sh + kh;
  const needW = (wo - 1) * sw + kw;
  const bottom = needH - h - top;
  const right = needW - w - left;
  let src = x;
  const temps: Info[] = [];
  if (bottom < 0 || right < 0) {
    src = run('Slice', backend, { x: src }, { begin: [0, 0, 0, 0], size: [n, Math.min(h, needH - top), Math.min(w, needW - left), ci] });
    temps.push(src);
  }
  if (top > 0 || left > 0 || bottom > 0 || right > 0) {
    src = run('PadV2', backend, { x: src }, { paddings: [[0, 0], [top, Math.max(0, bottom)], [left, Math.max(0, right)], [0, 0]], constantValue: 0 });
    temps.push(src);
  }
  const xT = run('Transpose', backend, { x: src }, { perm: [3, 1, 2, 0] });
  release(backend, ...temps);
  const dyT = run('Transpose', backend, { x: dy }, { perm: [1, 2, 0, 3] });
  const prod = run('Conv2D', backend, { x: xT, filter: dyT }, {
    strides: [1, 1], pad: 'valid', dataFormat: 'NHWC', dilations: [sh, sw], dimRoundingMode: undefined,
  });
  release(backend, xT, dyT);
  const out = run('Transpose', backend, { x: prod }, { perm: [1, 2, 0, 3] });
  release(backend, prod);
  return out;
}

/**
 * For stride 1 the input gradient is a forward convolution of dy with the filter flipped in
 * space and with its channel axes swapped, padded by (k - 1 - pad) on each side.
 * Other strides go to the backend's own kernel.
 */
function makeConv2DBackpropInput(original: tf.KernelFunc) {
  return (args: { inputs: tf.NamedTensorInfoMap; backend: tf.KernelBackend; attrs?: tf.NamedAttrMap }): Info => {
    const backend = args.backend as Backend;
    const { dy, filter } = args.inputs as { dy: Info; filter: Info };
    const attrs = (args.attrs ?? {}) as unknown as {
      inputShape: [number, number, number, number];
      strides: number | [number, number];
      pad: Pad;
      dataFormat?: string;
      dimRoundingMode?: 'floor' | 'round' | 'ceil';
    };
    const info = convInfo(attrs.inputShape, filter.shape, attrs.strides, attrs.pad, attrs.dimRoundingMode, attrs.dataFormat);
    if (info.strideHeight !== 1 || info.strideWidth !== 1) return original(args) as Info;
    const { filterHeight: kh, filterWidth: kw } = info;
    const { top, left, bottom, right } = info.padInfo;
    // dx[r] = sum_i dy[r + top - i] W[i]: a stride-1 convolution of dy, padded by k-1-pad, with W flipped.
    const pads: tf.backend_util.ExplicitPadding = [
      [0, 0],
      [kh - 1 - top, kh - 1 - bottom],
      [kw - 1 - left, kw - 1 - right],
      [0, 0],
    ];
    if (pads.some(([a, b]) => a < 0 || b < 0)) return original(args) as Info;
    const flipped = run('Reverse', backend, { x: filter }, { dims: [0, 1] });
    const swapped = run('Transpose', backend, { x: flipped }, { perm: [0, 1, 3, 2] });
    release(backend, flipped);
    const out = run('Conv2D', backend, { x: dy, filter: swapped }, {
      strides: [1, 1],
      pad: pads,
      dataFormat: 'NHWC',
      dilations: [1, 1],
      dimRoundingMode: undefined,
    });
    release(backend, swapped);
    return out;
  };
}

let registered = false;

/**
 * Registers kinhue's Conv2DBackpropFilter and the stride-1 fast path of Conv2DBackpropInput for
 * the wasm backend. Safe to call more than once.
 * @example
 * await import('@tensorflow/tfjs-backend-wasm');
 * registerWasmTrainingKernels();
 */
export function registerWasmTrainingKernels(): void {
  if (registered) return;
  if (!tf.getKernel('Conv2DBackpropFilter', 'wasm')) {
    tf.registerKernel({ kernelName: 'Conv2DBackpropFilter', backendName: 'wasm', kernelFunc: (process.env.KH_BPF === 'conv' ? conv2DBackpropFilterByConv : conv2DBackpropFilter) as tf.KernelFunc });
  }
  const original = tf.getKernel('Conv2DBackpropInput', 'wasm');
  if (original) {
    tf.unregisterKernel('Conv2DBackpropInput', 'wasm');
    tf.registerKernel({
      kernelName: 'Conv2DBackpropInput',
      backendName: 'wasm',
      setupFunc: original.setupFunc,
      kernelFunc: makeConv2DBackpropInput(original.kernelFunc) as tf.KernelFunc,
    });
  }
  registered = true;
}
