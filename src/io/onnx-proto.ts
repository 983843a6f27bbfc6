// defines: encodeModelProto and the ONNX message types it writes — the subset of the
// ONNX IR schema (onnx/onnx.proto3 in the ONNX specification) this project needs, as a
// protobufjs reflection descriptor. Field numbers are the specification's; fields not
// listed here are never written.

import protobuf from 'protobufjs/light.js';

/** TensorProto.DataType values used here (onnx.proto3). */
export const DataType = { FLOAT: 1, INT8: 3, INT64: 7 } as const;

/** AttributeProto.AttributeType values used here (onnx.proto3). */
export const AttributeType = { FLOAT: 1, INT: 2, INTS: 7 } as const;

export interface TensorProto {
  name: string;
  dims: number[];
  dataType: number;
  /** little-endian element bytes */
  rawData: Uint8Array;
}

export interface AttributeProto {
  name: string;
  type: number;
  f?: number;
  i?: number;
  ints?: number[];
}

export interface NodeProto {
  input: string[];
  output: string[];
  name: string;
  opType: string;
  attribute: AttributeProto[];
}

/** A dimension is a fixed size or a symbolic name (a dynamic axis). */
export type Dim = number | string;

export interface ValueInfoProto {
  name: string;
  elemType: number;
  shape: Dim[];
}

export interface ModelSpec {
  irVersion: number;
  opsetVersion: number;
  producerName: string;
  producerVersion: string;
  docString: string;
  graphName: string;
  nodes: NodeProto[];
  initializers: TensorProto[];
  inputs: ValueInfoProto[];
  outputs: ValueInfoProto[];
  metadata: Record<string, string>;
}

// Message and field numbers from onnx.proto3 (ONNX IR specification).
const descriptor = {
  nested: {
    onnx: {
      nested: {
        AttributeProto: {
          fields: {
            name: { type: 'string', id: 1 },
            f: { type: 'float', id: 2 },
            i: { type: 'int64', id: 3 },
            ints: { rule: 'repeated', type: 'int64', id: 8 },
            type: { type: 'int32', id: 20 }, // AttributeType enum
          },
        },
        ValueInfoProto: {
          fields: {
            name: { type: 'string', id: 1 },
            type: { type: 'TypeProto', id: 2 },
          },
        },
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
        StringStringEntryProto: {
          fields: {
            key: { type: 'string', id: 1 },
            value: { type: 'string', id: 2 },
          },
        },
        GraphProto: {
          fields: {
            node: { rule: 'repeated', type: 'NodeProto', id: 1 },
            name: { type: 'string', id: 2 },
            initializer: { rule: 'repeated', type: 'TensorProto', id: 5 },
            docString: { type: 'string', id: 10 },
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
          fields: {
            dim: { rule: 'repeated', type: 'Dimension', id: 1 },
          },
          nested: {
            Dimension: {
              oneofs: { value: { oneof: ['dimValue', 'dimParam'] } },
              fields: {
                dimValue: { type: 'int64', id: 1 },
                dimParam: { type: 'string', id: 2 },
              },
            },
          },
        },
        TypeProto: {
          oneofs: { value: { oneof: ['tensorType'] } },
          fields: {
            tensorType: { type: 'Tensor', id: 1 },
          },
          nested: {
            Tensor: {
              fields: {
                elemType: { type: 'int32', id: 1 },
                shape: { type: 'TensorShapeProto', id: 2 },
              },
            },
          },
        },
        OperatorSetIdProto: {
          fields: {
            domain: { type: 'string', id: 1 },
            version: { type: 'int64', id: 2 },
          },
        },
      },
    },
  },
};

let modelType: protobuf.Type | null = null;

function ModelProto(): protobuf.Type {
  modelType ??= protobuf.Root.fromJSON(descriptor).lookupType('onnx.ModelProto');
  return modelType;
}

function valueInfo(v: ValueInfoProto): object {
  return {
    name: v.name,
    type: {
      tensorType: {
        elemType: v.elemType,
        shape: { dim: v.shape.map((d) => (typeof d === 'number' ? { dimValue: d } : { dimParam: d })) },
      },
    },
  };
}

/** Serialises a model to the bytes of an `.onnx` file. */
export function encodeModelProto(spec: ModelSpec): Uint8Array {
  const type = ModelProto();
  const message = type.fromObject({
    irVersion: spec.irVersion,
    producerName: spec.producerName,
    producerVersion: spec.producerVersion,
    docString: spec.docString,
    opsetImport: [{ domain: '', version: spec.opsetVersion }],
    metadataProps: Object.entries(spec.metadata).map(([key, value]) => ({ key, value })),
    graph: {
      name: spec.graphName,
      node: spec.nodes.map((n) => ({ ...n, domain: '' })),
      initializer: spec.initializers,
      input: spec.inputs.map(valueInfo),
      output: spec.outputs.map(valueInfo),
    },
  });
  return type.encode(message).finish();
}

/** Decodes an `.onnx` file's bytes back to plain objects (for tests and inspection). */
export function decodeModelProto(bytes: Uint8Array): Record<string, unknown> {
  const type = ModelProto();
  return type.toObject(type.decode(bytes), { longs: Number }) as Record<string, unknown>;
}
