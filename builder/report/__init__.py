"""builder.report"""
