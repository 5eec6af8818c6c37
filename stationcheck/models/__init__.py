"""Bundled model files (package data): the demo tool-tip keypoint model in ONNX."""
