"""Accuracy of a keypoint detector against ground truth: tip error, PCK, miss and false
detection rates, and COCO OKS-based AP (through pycocotools, the reference implementation)."""
