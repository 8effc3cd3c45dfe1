// AudioWorklet processor of the fieldtl recorder: copies the first input channel, untouched,
// to the main thread in blocks. It does not filter, scale, dither or resample anything.
"use strict";

const BLOCK_FRAMES = 4096; // about 85 ms at 48 kHz: few messages, little delay on the meter

class FieldtlCapture extends AudioWorkletProcessor {
  constructor() {
    super();
    this.block = new Float32Array(BLOCK_FRAMES);
    this.filled = 0;
    this.port.onmessage = (event) => {
      if (event.data === "flush") {
        this.send();
        this.port.postMessage({ type: "flushed" });
      }
    };
  }

  send() {
    if (this.filled === 0) return;
    const samples = this.block.slice(0, this.filled);
    this.port.postMessage({ type: "samples", samples }, [samples.buffer]);
    this.filled = 0;
  }

  process(inputs) {
    const channel = inputs[0] && inputs[0][0];
    if (channel) {
      let offset = 0;
      while (offset < channel.length) {
        const count = Math.min(channel.length - offset, BLOCK_FRAMES - this.filled);
        this.block.set(channel.subarray(offset, offset + count), this.filled);
        this.filled += count;
        offset += count;
        if (this.filled === BLOCK_FRAMES) this.send();
      }
    }
    return true; // keep running until the main thread disconnects the node
  }
}

registerProcessor("fieldtl-capture", FieldtlCapture);
