"""Run by pvpython (ParaView's Python) from test_vtk_readback: reads a run's fields.pvd and boundary.pvd
with ParaView's own PVD reader and prints what ParaView sees as JSON."""
import json, sys
from paraview.simple import PVDReader
from paraview import servermanager
folder = sys.argv[1]
out = {}
for name in ("fields", "boundary"):
    reader = PVDReader(FileName=f"{folder}/{name}.pvd")
    reader.UpdatePipelineInformation()
    times = list(reader.TimestepValues)
    reader.UpdatePipeline(times[-1])
    cd = reader.CellData
    data = servermanager.Fetch(reader)
    block = data.GetBlock(0) if data.IsA("vtkMultiBlockDataSet") else data
    fd = block.GetFieldData()
    names = {}
    for i in range(fd.GetNumberOfArrays()):
        a = fd.GetAbstractArray(i)
        if a.IsA("vtkStringArray"):
            names[a.GetName()] = [a.GetValue(k) for k in range(a.GetNumberOfValues())]
    out[name] = {"times": times, "ranges": {a.GetName(): list(a.GetRange()) for a in cd},
                 "n_cells": block.GetNumberOfCells(), "names": names}
print(json.dumps(out))
