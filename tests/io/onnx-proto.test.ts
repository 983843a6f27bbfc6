// The hand-written ONNX writer (src/io/onnx-proto.ts) read back by an independent
// protobuf implementation: protobufjs reflection, built here from the message and field
// numbers of onnx/onnx.proto3 (the ONNX specification, `syntax = "proto3"`). Reflection
// compiles its codecs with `new Function`, which is fine in a Node test and is exactly
// why src/ may not use it (tests/io/onnx-csp.test.ts).
import protobuf from 'protobufjs/light.js';
import { describe, expect, it } from 'vitest';
import { presetConfig } from '../../src/model/config.js';
import { ReaderParams } from '../../src/model/params.js';
import { OPSET, exportOnnx } from '../../src/io/onnx.js';
import { AttributeType, DataType, encodeModelProto, type Dim, type ModelSpec, type ValueInfoProto } from '../../src/io/onnx-proto.js';
import { littleEndianBytes } from '../../src/io/safetensors.js';

// Message and field numbers from onnx/onnx.proto3 — the fields the writer uses plus the
// two `domain` fields it leaves out on purpose (they must read back as "").
const schema = {
  nested: {
    onnx: {
      nested: {
        AttributeProto: {
          fields: {
            name: { type: 'string', id: 1 },
            f: { type: 'float', id: 2 },
            i: { type: 'int64', id: 3 },
            ints: { rule: 'repeated', type: 'int64', id: 8 },
            type: { type: 'int32', id: 20 },
          },
        },
        ValueInfoProto: { fields: { name: { type: 'string', id: 1 }, type: { type: 'TypeProto', id: 2 } } },
        NodeProto: {
          fields: {
            input: { rule: 'repeated', type: 'string', id: 1 },
            output: { rule: 'repeated', type: 'string', id: 2 },
            name: { type: 'string', id: 3 },
            opType: { type: 'string', id: 4 },
            attribute: { rule: 'repeated', type: 'AttributeProto', id: 5 },
            domain: { type: 'string', id: 7 },
          },
        },
        ModelProto: {
          fields: {
            irVersion: { type: 'int64', id: 1 },
            producerName: { type: 'string', id: 2 },
            producerVersion: { type: 'string', id: 3 },
            docString: { type: 'string', id: 6 },
            graph: { type: 'GraphProto', id: 7 },
            opsetImport: { rule: 'repeated', type: 'OperatorSetIdProto', id: 8 },
            metadataProps: { rule: 'repeated', type: 'StringStringEntryProto', id: 14 },
          },
        },
        StringStringEntryProto: { fields: { key: { type: 'string', id: 1 }, value: { type: 'string', id: 2 } } },
        GraphProto: {
          fields: {
            node: { rule: 'repeated', type: 'NodeProto', id: 1 },
            name: { type: 'string', id: 2 },
            initializer: { rule: 'repeated', type: 'TensorProto', id: 5 },
            input: { rule: 'repeated', type: 'ValueInfoProto', id: 11 },
            output: { rule: 'repeated', type: 'ValueInfoProto', id: 12 },
          },
        },
        TensorProto: {
          fields: {
            dims: { rule: 'repeated', type: 'int64', id: 1 },
            dataType: { type: 'int32', id: 2 },
            name: { type: 'string', id: 8 },
            rawData: { type: 'bytes', id: 9 },
          },
        },
        TensorShapeProto: {
          fields: { dim: { rule: 'repeated', type: 'Dimension', id: 1 } },
          nested: {
            Dimension: {
              oneofs: { value: { oneof: ['dimValue', 'dimParam'] } },
              fields: { dimValue: { type: 'int64', id: 1 }, dimParam: { type: 'string', id: 2 } },
            },
          },
        },
        TypeProto: {
          oneofs: { value: { oneof: ['tensorType'] } },
          fields: { tensorType: { type: 'Tensor', id: 1 } },
          nested: {
            Tensor: { fields: { elemType: { type: 'int32', id: 1 }, shape: { type: 'TensorShapeProto', id: 2 } } },
          },
        },
        OperatorSetIdProto: { fields: { domain: { type: 'string', id: 1 }, version: { type: 'int64', id: 2 } } },
      },
    },
  },
};

const ModelProto = protobuf.Root.fromJSON(schema).lookupType('onnx.ModelProto');

/** Decodes with every absent scalar filled in with its proto3 default. */
function decode(bytes: Uint8Array): Record<string, unknown> {
  return ModelProto.toObject(ModelProto.decode(bytes), { longs: Number, defaults: true, arrays: true }) as Record<string, unknown>;
}

/** Byte buffers (Buffer in Node) as their length and FNV-1a hash, so structures
 *  compare by value and a mismatch prints a short diff. */
function plain(value: unknown): unknown {
  if (value instanceof Uint8Array) {
    let h = 0x811c9dc5;
    for (const b of value) h = Math.imul(h ^ b, 0x01000193) >>> 0;
    return `${value.length} bytes, fnv1a ${h.toString(16)}`;
  }
  if (Array.isArray(value)) return value.map(plain);
  if (value !== null && typeof value === 'object') return Object.fromEntries(Object.entries(value).map(([k, v]) => [k, plain(v)]));
  return value;
}

/** What the writer means `spec` to say, as the reflection decoder spells it (defaults filled in). */
function intended(spec: ModelSpec): unknown {
  const valueInfo = (v: ValueInfoProto) => ({
    name: v.name,
    type: {
      tensorType: {
        elemType: v.elemType,
        shape: { dim: v.shape.map((d: Dim) => (typeof d === 'number' ? { dimValue: d } : { dimParam: d })) },
      },
    },
  });
  return {
    irVersion: spec.irVersion,
    producerName: spec.producerName,
    producerVersion: spec.producerVersion,
    docString: spec.docString,
    opsetImport: [{ domain: '', version: spec.opsetVersion }],
    metadataProps: Object.entries(spec.metadata).map(([key, value]) => ({ key, value })),
    graph: {
      name: spec.graphName,
      node: spec.nodes.map((n) => ({
        input: n.input,
        output: n.output,
        name: n.name,
        opType: n.opType,
        domain: '',
        // AttributeProto.f is a binary32 float: 1e-12 reads back rounded
        attribute: n.attribute.map((a) => ({ name: a.name, type: a.type, f: Math.fround(a.f ?? 0), i: a.i ?? 0, ints: a.ints ?? [] })),
      })),
      initializer: spec.initializers.map((t) => ({ name: t.name, dims: t.dims, dataType: t.dataType, rawData: t.rawData })),
      input: spec.inputs.map(valueInfo),
      output: spec.outputs.map(valueInfo),
    },
  };
}

/** A spec touching every kind of field: negative and 64-bit varints, packed lists,
 *  floats, empty dims, multi-byte lengths (a 70 000-byte raw_data), non-ASCII text. */
function everyFieldSpec(): ModelSpec {
  const big = new Float32Array(17_500).map((_, i) => Math.sin(i) * 1e3);
  return {
    irVersion: 8,
    opsetVersion: 17,
    producerName: 'spanwright',
    producerVersion: '0.1.0',
    docString: 'a reader — Lesezeichen, 読み取り; '.repeat(8),
    graphName: 'reader',
    nodes: [
      { input: ['x', 'w'], output: ['y'], name: 'n/MatMul_0', opType: 'MatMul', attribute: [] },
      {
        input: ['y', '', 'b'], // an empty input name is ONNX's "optional input left out"
        output: ['z', 'z:1'],
        name: 'n/LayerNormalization_1',
        opType: 'LayerNormalization',
        attribute: [
          { name: 'axis', type: AttributeType.INT, i: -1 },
          { name: 'epsilon', type: AttributeType.FLOAT, f: 1e-12 },
          { name: 'stash_type', type: AttributeType.INT, i: 0 },
          { name: 'perm', type: AttributeType.INTS, ints: [0, 2, -1, 2 ** 40] },
        ],
      },
    ],
    initializers: [
      { name: 'w', dims: [2, 3], dataType: DataType.FLOAT, rawData: littleEndianBytes(new Float32Array([1, -2, 3.5, 0, 1e-7, -0])) },
      { name: 'scalar', dims: [], dataType: DataType.FLOAT, rawData: littleEndianBytes(new Float32Array([0.5])) },
      { name: 'shape', dims: [4], dataType: DataType.INT64, rawData: littleEndianBytes(BigInt64Array.from([0n, 0n, -1n, 300n])) },
      { name: 'q', dims: [3], dataType: DataType.INT8, rawData: littleEndianBytes(new Int8Array([-127, 0, 127])) },
      { name: 'big', dims: [big.length], dataType: DataType.FLOAT, rawData: littleEndianBytes(big) },
    ],
    inputs: [{ name: 'x', elemType: DataType.FLOAT, shape: ['batch', 300, 1] }],
    outputs: [{ name: 'z', elemType: DataType.FLOAT, shape: ['batch', 'sequence'] }],
    metadata: { weights: 'float32', note: 'Größe ≤ 1 MB' },
  };
}

describe('ONNX writer read back by protobufjs reflection', () => {
  it('a spec with every field kind decodes to exactly what it says', () => {
    const spec = everyFieldSpec();
    const bytes = encodeModelProto(spec);
    expect(plain(decode(bytes))).toEqual(plain(intended(spec)));
  });

  it('writes the same bytes as the reflection encoder', () => {
    // Reflection writes fields in ascending number with proto3 implicit presence, as the
    // hand-written writer promises: the same message gives the same bytes.
    const spec = everyFieldSpec();
    const reference = ModelProto.encode(ModelProto.fromObject(intended(spec) as Record<string, unknown>)).finish();
    expect(Array.from(encodeModelProto(spec))).toEqual(Array.from(reference));
  });

  it('packs repeated int64 fields (proto3 default), as one length-delimited run', () => {
    const spec = everyFieldSpec();
    spec.initializers = [{ name: 't', dims: [2, 3], dataType: DataType.FLOAT, rawData: new Uint8Array(24) }];
    const bytes = encodeModelProto(spec);
    // TensorProto.dims = 1, wire type 2: key 0x0a, length 2, then the varints 2 and 3
    const at = bytes.findIndex(
      (_, i) => bytes[i] === 0x0a && bytes[i + 1] === 2 && bytes[i + 2] === 2 && bytes[i + 3] === 3 && bytes[i + 4] === 0x10,
    );
    expect(at).toBeGreaterThan(0);
  });

  it('exportOnnx declares opset 17, int64 [batch, sequence] inputs and int8 initializers', () => {
    const config = presetConfig('tiny', 64, { hiddenSize: 32, numHeads: 4, intermediateSize: 64, numLayers: 2, maxPositions: 24 });
    const params = ReaderParams.init(config, 11);
    const named = params.toNamed();
    params.dispose();
    const model = decode(exportOnnx(config, named, { int8: true })) as {
      irVersion: number;
      opsetImport: Array<{ domain: string; version: number }>;
      graph: {
        input: Array<{ name: string; type: { tensorType: { elemType: number; shape: { dim: Array<{ dimParam?: string }> } } } }>;
        initializer: Array<{ name: string; dataType: number; dims: number[]; rawData: Uint8Array }>;
        node: Array<{ opType: string; domain: string; attribute: Array<{ name: string; type: number; i: number; ints: number[] }> }>;
      };
    };
    expect(model.opsetImport).toEqual([{ domain: '', version: OPSET }]);
    expect(model.graph.input.map((i) => i.name)).toEqual(['input_ids', 'attention_mask', 'token_type_ids']);
    for (const input of model.graph.input) {
      expect(input.type.tensorType.elemType).toBe(7); // INT64 in onnx.proto3
      expect(input.type.tensorType.shape.dim.map((d) => d.dimParam)).toEqual(['batch', 'sequence']);
    }
    const int8 = model.graph.initializer.filter((t) => t.dataType === 3); // INT8 in onnx.proto3
    // 3 embedding tables + 6 Linear weights per layer × 2 layers + qa_outputs (zero points are INT8 too)
    expect(int8.filter((t) => t.name.endsWith('.int8')).length).toBe(3 + 6 * 2 + 1);
    expect(model.graph.node.filter((n) => n.opType === 'DequantizeLinear').length).toBe(3 + 6 * 2 + 1);
    expect(model.graph.node.some((n) => n.opType === 'Erf')).toBe(true);
    // raw_data holds dims × element size bytes for every initializer
    const size: Record<number, number> = { 1: 4, 3: 1, 7: 8 }; // FLOAT, INT8, INT64 widths (onnx.proto3)
    for (const t of model.graph.initializer) expect(t.rawData.length).toBe(t.dims.reduce((a, b) => a * b, 1) * size[t.dataType]!);
    // every node in the default domain; Transpose's perm and Softmax's axis −1 survive
    expect(model.graph.node.every((n) => n.domain === '')).toBe(true);
    const perm = model.graph.node.find((n) => n.opType === 'Transpose')!.attribute.find((a) => a.name === 'perm')!;
    expect(perm).toMatchObject({ type: AttributeType.INTS, ints: [0, 2, 1, 3] });
    const softmax = model.graph.node.find((n) => n.opType === 'Softmax')!.attribute[0]!;
    expect(softmax).toMatchObject({ name: 'axis', type: AttributeType.INT, i: -1 });
  });
});
