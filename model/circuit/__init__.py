"""The nodal core: netlist, plan, assembly, Newton, dense batched solves, the device, the topology builders."""
