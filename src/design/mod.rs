//! The pipeline: wires the stages in workflow order.
