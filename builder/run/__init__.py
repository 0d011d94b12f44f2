"""builder.run"""
