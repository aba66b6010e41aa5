"""B-rep access through OpenCASCADE (OCP): STEP files, their faces and shared edges, exact surface
evaluation and tessellation. Nothing outside this package imports the kernel."""
