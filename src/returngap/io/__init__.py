"""Files -> board model: inputs, layer roles, Gerber, Excellon, IPC-D-356, job file, outline,
gerbonara fixes."""
