"""The pure, replayable core: tracker -> zones -> sequencer, with the records they exchange.

Nothing in this package reads a clock, touches files, sockets or threads, or imports OpenCV,
onnxruntime, pymodbus or sqlite3 (a test scans every module's imports). Time is an input.
"""
