# Leaf-spectrum classifier package (PyTorch port).
