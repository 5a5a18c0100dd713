<!DOCTYPE qgis PUBLIC 'http://mrcc.com/qgis.dtd' 'SYSTEM'>
<qgis hasScaleBasedVisibilityFlag="0" labelsEnabled="0" maxScale="0" minScale="100000000" simplifyAlgorithm="0" simplifyDrawingHints="1" simplifyDrawingTol="1" simplifyLocal="1" simplifyMaxScale="1" styleCategories="Symbology|Labeling|Rendering" symbologyReferenceScale="-1" version="3.22.16-Białowieża">
 <renderer-v2 attr="source" enableorderby="0" forceraster="0" referencescale="-1" symbollevels="0" type="categorizedSymbol">
  <categories>
   <category label="DEM sample" render="true" symbol="0" value="dem"></category>
   <category label="contour crossing" render="true" symbol="1" value="contours"></category>
  </categories>
  <symbols>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="0" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="91,91,91,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="circle"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="35,35,35,255"></Option>
      <Option name="outline_style" type="QString" value="no"></Option>
      <Option name="outline_width" type="QString" value="0"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="1"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="91,91,91,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="circle"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="35,35,35,255"></prop>
     <prop k="outline_style" v="no"></prop>
     <prop k="outline_width" v="0"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="1"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
   <symbol alpha="1" clip_to_extent="1" force_rhr="0" name="1" type="marker">
    <data_defined_properties>
     <Option type="Map">
      <Option name="name" type="QString" value=""></Option>
      <Option name="properties"></Option>
      <Option name="type" type="QString" value="collection"></Option>
     </Option>
    </data_defined_properties>
    <layer class="SimpleMarker" enabled="1" locked="0" pass="0">
     <Option type="Map">
      <Option name="angle" type="QString" value="0"></Option>
      <Option name="cap_style" type="QString" value="square"></Option>
      <Option name="color" type="QString" value="242,140,40,255"></Option>
      <Option name="horizontal_anchor_point" type="QString" value="1"></Option>
      <Option name="joinstyle" type="QString" value="bevel"></Option>
      <Option name="name" type="QString" value="triangle"></Option>
      <Option name="offset" type="QString" value="0,0"></Option>
      <Option name="offset_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="offset_unit" type="QString" value="MM"></Option>
      <Option name="outline_color" type="QString" value="122,63,0,255"></Option>
      <Option name="outline_style" type="QString" value="solid"></Option>
      <Option name="outline_width" type="QString" value="0.1"></Option>
      <Option name="outline_width_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="outline_width_unit" type="QString" value="MM"></Option>
      <Option name="scale_method" type="QString" value="diameter"></Option>
      <Option name="size" type="QString" value="1.8"></Option>
      <Option name="size_map_unit_scale" type="QString" value="3x:0,0,0,0,0,0"></Option>
      <Option name="size_unit" type="QString" value="MM"></Option>
      <Option name="vertical_anchor_point" type="QString" value="1"></Option>
     </Option>
     <prop k="angle" v="0"></prop>
     <prop k="cap_style" v="square"></prop>
     <prop k="color" v="242,140,40,255"></prop>
     <prop k="horizontal_anchor_point" v="1"></prop>
     <prop k="joinstyle" v="bevel"></prop>
     <prop k="name" v="triangle"></prop>
     <prop k="offset" v="0,0"></prop>
     <prop k="offset_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="offset_unit" v="MM"></prop>
     <prop k="outline_color" v="122,63,0,255"></prop>
     <prop k="outline_style" v="solid"></prop>
     <prop k="outline_width" v="0.1"></prop>
     <prop k="outline_width_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="outline_width_unit" v="MM"></prop>
     <prop k="scale_method" v="diameter"></prop>
     <prop k="size" v="1.8"></prop>
     <prop k="size_map_unit_scale" v="3x:0,0,0,0,0,0"></prop>
     <prop k="size_unit" v="MM"></prop>
     <prop k="vertical_anchor_point" v="1"></prop>
     <data_defined_properties>
      <Option type="Map">
       <Option name="name" type="QString" value=""></Option>
       <Option name="properties"></Option>
       <Option name="type" type="QString" value="collection"></Option>
      </Option>
     </data_defined_properties>
    </layer>
   </symbol>
  </symbols>
  <rotation></rotation>
  <sizescale></sizescale>
 </renderer-v2>
 <blendMode>0</blendMode>
 <featureBlendMode>0</featureBlendMode>
 <layerOpacity>1</layerOpacity>
 <layerGeometryType>0</layerGeometryType>
</qgis>
